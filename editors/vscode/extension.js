// The sdeck extension: starts `sdeck lsp` and connects it to the editor. Everything the
// editor shows (diagnostics, hover, hints, fixes, formatting) comes from the server.
"use strict";

const path = require("path");
const fs = require("fs");
const vscode = require("vscode");
const { LanguageClient, TransportKind } = require("vscode-languageclient/node");

let client;

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

async function activate(context) {
  const command = serverCommand(context);
  const extraArgs = vscode.workspace.getConfiguration("sdeck").get("server.extraArgs", []);
  const run = { command, args: ["lsp", ...extraArgs], transport: TransportKind.stdio };
  client = new LanguageClient(
    "sdeck",
    "sdeck language server",
    { run, debug: run },
    {
      documentSelector: [{ language: "sdeck" }],
      synchronize: {
        // Rule levels live in sdeck.toml; the server reads them again on save.
        fileEvents: vscode.workspace.createFileSystemWatcher("**/sdeck.toml"),
      },
    }
  );
  context.subscriptions.push(
    vscode.workspace.onDidChangeConfiguration(async (event) => {
      if (event.affectsConfiguration("sdeck.server")) {
        await restart(context);
      }
    })
  );
  try {
    await client.start();
  } catch (error) {
    vscode.window.showErrorMessage(
      `sdeck: could not start \`${command} lsp\` (${error}). Set "sdeck.server.path" to an sdeck binary.`
    );
  }
}

async function restart(context) {
  if (client) {
    await client.stop();
  }
  await activate(context);
}

async function deactivate() {
  if (client) {
    await client.stop();
  }
}

module.exports = { activate, deactivate };
