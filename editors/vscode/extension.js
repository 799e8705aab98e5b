// The sdeck extension: starts `sdeck lsp` and connects it to the editor. Everything the
// editor shows (diagnostics, hover, hints, fixes, formatting) comes from the server.
"use strict";

const path = require("path");
const fs = require("fs");
const vscode = require("vscode");
const { LanguageClient, TransportKind } = require("vscode-languageclient/node");

let client;
let watcher;

/** The binary to run: the setting when given, else the one bundled in server/. */
function serverCommand(context) {
  const configured = vscode.workspace.getConfiguration("sdeck").get("server.path", "").trim();
  if (configured !== "") {
    return configured; // a bare name is found on PATH by the operating system
  }
  const name = process.platform === "win32" ? "sdeck.exe" : "sdeck";
  const bundled = context.asAbsolutePath(path.join("server", name));
  if (fs.existsSync(bundled)) {
    return bundled;
  }
  return "sdeck";
}

/** Starts a client for the current settings. Only one exists at a time. */
async function startClient(context) {
  const command = serverCommand(context);
  const extraArgs = vscode.workspace.getConfiguration("sdeck").get("server.extraArgs", []);
  const run = { command, args: ["lsp", ...extraArgs], transport: TransportKind.stdio };
  // Rule levels live in sdeck.toml; the server reads them again when it changes. The
  // watcher belongs to this client and is disposed with it.
  watcher = vscode.workspace.createFileSystemWatcher("**/sdeck.toml");
  client = new LanguageClient(
    "sdeck",
    "sdeck language server",
    { run, debug: run },
    {
      documentSelector: [{ language: "sdeck" }],
      synchronize: { fileEvents: watcher },
    }
  );
  try {
    await client.start();
  } catch (error) {
    vscode.window.showErrorMessage(
      `sdeck: could not start \`${command} lsp\` (${error}). Set "sdeck.server.path" to an sdeck binary.`
    );
  }
}

/** Stops the client and its watcher, if any. */
async function stopClient() {
  const old = client;
  client = undefined;
  if (watcher) {
    watcher.dispose();
    watcher = undefined;
  }
  if (old) {
    try {
      await old.stop();
    } catch (_) {
      // A client that never started has nothing to stop.
    }
  }
}

let restarting = Promise.resolve();

/** Restarts the server once per change, one restart after another. */
function restart(context) {
  restarting = restarting.then(async () => {
    await stopClient();
    await startClient(context);
  });
  return restarting;
}

async function activate(context) {
  // Registered once, here: a restart does not add another listener.
  context.subscriptions.push(
    vscode.workspace.onDidChangeConfiguration((event) => {
      if (event.affectsConfiguration("sdeck.server")) {
        restart(context);
      }
    })
  );
  await startClient(context);
}

async function deactivate() {
  await restarting;
  await stopClient();
}

module.exports = { activate, deactivate };
