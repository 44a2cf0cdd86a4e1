// Tokenises files with a TextMate grammar, using the engine VS Code uses
// (vscode-textmate with the Oniguruma regular expressions of
// vscode-oniguruma). Usage: node tokenise.js GRAMMAR FILE...
// Prints JSON: for each file, for each line, its tokens as
// {start, end, scopes} (character offsets in the line).
const fs = require("fs");
const textmate = require("vscode-textmate");
const oniguruma = require("vscode-oniguruma");

async function main() {
  const [grammarPath, ...files] = process.argv.slice(2);
  const wasm = fs.readFileSync(require.resolve("vscode-oniguruma/release/onig.wasm")).buffer;
  await oniguruma.loadWASM(wasm);
  const registry = new textmate.Registry({
    onigLib: Promise.resolve({
      createOnigScanner: (patterns) => new oniguruma.OnigScanner(patterns),
      createOnigString: (s) => new oniguruma.OnigString(s),
    }),
    loadGrammar: async () =>
      textmate.parseRawGrammar(fs.readFileSync(grammarPath, "utf8"), grammarPath),
  });
  const grammar = await registry.loadGrammar("source.mech");
  if (!grammar) throw new Error("the grammar did not load");
  const out = {};
  for (const file of files) {
    const text = fs.readFileSync(file, "utf8").replace(/^\uFEFF/, "");
    let state = textmate.INITIAL;
    out[file] = text.split(/\r\n|\r|\n/).map((line) => {
      const result = grammar.tokenizeLine(line, state);
      state = result.ruleStack;
      return result.tokens.map((t) => ({
        start: t.startIndex,
        end: Math.min(t.endIndex, line.length),
        scopes: t.scopes,
      }));
    });
  }
  process.stdout.write(JSON.stringify(out));
}

main().catch((e) => {
  console.error(e);
  process.exit(1);
});
