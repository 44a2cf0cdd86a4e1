// Starts `ratewright lsp` for .mech files. Everything the editor shows
// beyond colouring (diagnostics, hover, go-to, rename, completion,
// formatting, outline, quick fixes) comes from the server, so the editor
// and `ratewright check` never disagree.
const vscode = require("vscode");
const { LanguageClient, TransportKind } = require("vscode-languageclient/node");

let client;

function activate(context) {
  const program = vscode.workspace.getConfiguration("ratewright").get("path") || "ratewright";
  const server = { command: program, args: ["lsp"], transport: TransportKind.stdio };
  client = new LanguageClient(
    "ratewright",
    "ratewright",
    { run: server, debug: server },
    { documentSelector: [{ scheme: "file", language: "mech" }] }
  );
  context.subscriptions.push({ dispose: () => client && client.stop() });
  return client.start();
}

function deactivate() {
  return client ? client.stop() : undefined;
}

module.exports = { activate, deactivate };
