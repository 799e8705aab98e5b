// Builds the .vsix with the sdeck binary bundled for this platform:
//   cargo build --release -p sdeck-cli      (at the repository root)
//   cd editors/vscode && npm install && npm run package
// The binary is taken from ../../target/release/sdeck (or SDECK_BINARY) and copied into
// server/; the package is named for the platform (vsce --target).
"use strict";

const fs = require("fs");
const path = require("path");
const { execFileSync } = require("child_process");

const here = path.resolve(__dirname, "..");
const exe = process.platform === "win32" ? "sdeck.exe" : "sdeck";
const binary = process.env.SDECK_BINARY || path.resolve(here, "..", "..", "target", "release", exe);

if (!fs.existsSync(binary)) {
  console.error(`sdeck binary not found at ${binary}; run \`cargo build --release -p sdeck-cli\` first`);
  process.exit(1);
}

const targets = {
  "linux-x64": "linux-x64",
  "linux-arm64": "linux-arm64",
  "darwin-x64": "darwin-x64",
  "darwin-arm64": "darwin-arm64",
  "win32-x64": "win32-x64",
};
const target = targets[`${process.platform}-${process.arch}`];
if (!target) {
  console.error(`no VS Code target for ${process.platform}-${process.arch}`);
  process.exit(1);
}

fs.mkdirSync(path.join(here, "server"), { recursive: true });
const bundled = path.join(here, "server", exe);
fs.copyFileSync(binary, bundled);
fs.chmodSync(bundled, 0o755);

const vsce = path.join(here, "node_modules", "@vscode", "vsce", "vsce");
execFileSync(process.execPath, [vsce, "package", "--target", target, "--out", `sdeck-${target}.vsix`], {
  cwd: here,
  stdio: "inherit",
});
