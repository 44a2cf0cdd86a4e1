"""Drives `ratewright lsp` with pygls's language client over stdio.

Usage: lsp_client.py RATEWRIGHT DIR

DIR holds main.mech (which `use`s lib.mech) and lib.mech. The script
opens main.mech, changes it (typos, fixes, half-typed lines), asks every
feature, applies the edits the server offers as an editor would, and
prints one JSON object recording each text the server saw with its
answers. The test (tests/lsp.rs) checks them against `ratewright check
--format json`, `fmt` and `emit -t json` run on the same texts. Nothing is
judged here except that the protocol itself works (answers arrive, errors
carry the protocol's codes).
"""

import asyncio
import concurrent.futures
import json
import sys
import uuid
from pathlib import Path

from lsprotocol import types
from pygls.exceptions import JsonRpcException
from pygls.lsp.client import LanguageClient
from pygls.protocol.json_rpc import JsonRPCRequestMessage


def offset_of(text, line, character):
    lines = text.split("\n")
    return sum(len(l) + 1 for l in lines[:line]) + min(character, len(lines[line]) if line < len(lines) else 0)


def position_of(text, needle, nth=0, delta=0):
    start = -1
    for _ in range(nth + 1):
        start = text.index(needle, start + 1)
    start += delta
    before = text[:start]
    line = before.count("\n")
    character = start - (before.rfind("\n") + 1)
    return types.Position(line=line, character=character)


def apply_edits(text, edits):
    spans = []
    for e in edits:
        r = e.range
        spans.append(
            (offset_of(text, r.start.line, r.start.character), offset_of(text, r.end.line, r.end.character), e.new_text)
        )
    for start, end, new in sorted(spans, key=lambda s: s[0], reverse=True):
        text = text[:start] + new + text[end:]
    return text


def full_range(text):
    lines = text.split("\n")
    return types.Range(
        start=types.Position(line=0, character=0),
        end=types.Position(line=len(lines) - 1, character=len(lines[-1])),
    )


def as_json(value):
    """lsprotocol objects → plain JSON, with the protocol's field names."""
    return json.loads(json.dumps(value, default=lambda o: CONVERTER.unstructure(o)))


CONVERTER = None


def raw_request(protocol, method, params):
    """A request whose params are sent as given: the typed requests of the
    client drop fields the protocol does not define (here a version in
    `textDocument`), so this one goes out as plain JSON through the same
    connection, and its answer is read by the client as usual."""
    msg_id = str(uuid.uuid4())
    future = concurrent.futures.Future()
    protocol._request_futures[msg_id] = future
    protocol._result_types[msg_id] = protocol.get_result_type(method)
    protocol._send_data(JsonRPCRequestMessage(id=msg_id, method=method, params=params, jsonrpc="2.0"))
    return asyncio.wrap_future(future)


class Session:
    def __init__(self, binary, folder):
        self.binary = binary
        self.folder = Path(folder).resolve()
        self.main = self.folder / "main.mech"
        self.lib = self.folder / "lib.mech"
        self.uri = self.main.as_uri()
        self.lib_uri = self.lib.as_uri()
        self.text = self.main.read_text()
        self.version = 1
        self.published = {}
        self.waiters = []
        self.record = {"snapshots": [], "half_typed": [], "log": []}
        self.client = LanguageClient("ratewright-test", "1")
        global CONVERTER
        CONVERTER = self.client.protocol._converter

        @self.client.feature(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)
        def on_diagnostics(params):
            self.published.setdefault(params.uri, []).append(params)
            for waiter in list(self.waiters):
                uri, version, future = waiter
                if params.uri == uri and params.version == version and not future.done():
                    future.set_result(params)
                    self.waiters.remove(waiter)

        @self.client.feature(types.WINDOW_LOG_MESSAGE)
        def on_log(params):
            self.record["log"].append(params.message)

    def pos(self, needle, nth=0, delta=0):
        return position_of(self.text, needle, nth, delta)

    def doc(self):
        return types.TextDocumentIdentifier(uri=self.uri)

    async def diagnostics_for(self, version, uri=None):
        uri = uri or self.uri
        for p in self.published.get(uri, []):
            if p.version == version:
                return p
        future = asyncio.get_running_loop().create_future()
        self.waiters.append((uri, version, future))
        return await asyncio.wait_for(future, 60)

    async def change(self, edits):
        """Sends `edits` (range, text) as one incremental change."""
        self.version += 1
        changes = []
        for r, new in edits:
            changes.append(types.TextDocumentContentChangePartial(range=r, text=new))
            self.text = apply_edits(self.text, [types.TextEdit(range=r, new_text=new)])
        self.client.text_document_did_change(
            types.DidChangeTextDocumentParams(
                text_document=types.VersionedTextDocumentIdentifier(uri=self.uri, version=self.version),
                content_changes=changes,
            )
        )

    async def snapshot(self, label):
        published = await self.diagnostics_for(self.version)
        self.record["snapshots"].append(
            {"label": label, "version": self.version, "text": self.text, "diagnostics": as_json(published.diagnostics)}
        )
        return published.diagnostics

    async def hover(self, needle, nth=0, delta=0):
        h = await self.client.text_document_hover_async(
            types.HoverParams(text_document=self.doc(), position=self.pos(needle, nth, delta))
        )
        return None if h is None else h.contents.value

    async def actions_at(self, diagnostic):
        return await self.client.text_document_code_action_async(
            types.CodeActionParams(
                text_document=self.doc(),
                range=diagnostic.range,
                context=types.CodeActionContext(diagnostics=[diagnostic]),
            )
        )

    async def apply_action(self, action):
        """Applies a code action's edit as an editor would: only if it names
        the version the document is at."""
        (edit,) = action.edit.document_changes
        assert edit.text_document.version == self.version, "an edit for another version"
        await self.change([(e.range, e.new_text) for e in sorted(edit.edits, key=lambda e: (e.range.start.line, e.range.start.character), reverse=True)])


REQUESTS = [
    "textDocument/hover",
    "textDocument/definition",
    "textDocument/references",
    "textDocument/completion",
    "textDocument/documentSymbol",
    "textDocument/semanticTokens/full",
    "textDocument/formatting",
    "textDocument/rangeFormatting",
    "textDocument/codeAction",
    "textDocument/prepareRename",
    "textDocument/rename",
]

STRAYS = ["(", ")", "<=>", "->", '"', "#", "µ", "𝄞", "\r", "\t", "=", ",", "^-", "1e", "/", "law", "with",
          ' use "missing.mech"\n', "(((", "species", "\u00a0", "∅"]


async def mangled_models(c):
    import random

    rng = random.Random(20)
    root = Path(__file__).resolve().parent.parent.parent
    files = sorted(root.glob("models/*.mech")) + sorted(root.glob("tests/fixtures/**/*.mech"))
    answered, internal = 0, []
    for n, path in enumerate(files):
        text = path.read_text()
        uri = (Path(tempfile_dir()) / f"mangled_{n}.mech").as_uri()
        c.text_document_did_open(
            types.DidOpenTextDocumentParams(
                text_document=types.TextDocumentItem(uri=uri, language_id="mech", version=1, text=text)
            )
        )
        for version in range(2, 12):
            a = rng.randrange(len(text) + 1)
            b = rng.randrange(a, len(text) + 1)
            t = [
                lambda: text[:a],
                lambda: text[:a] + text[b:],
                lambda: text[:a] + rng.choice(STRAYS) + text[a:],
                lambda: "".join(ch for ch in text if rng.random() > 0.05),
            ][rng.randrange(4)]()
            c.text_document_did_change(
                types.DidChangeTextDocumentParams(
                    text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
                    content_changes=[types.TextDocumentContentChangeWholeDocument(text=t)],
                )
            )
            lines = t.split("\n")
            for method in REQUESTS:
                position = {"line": rng.randrange(len(lines) + 1), "character": rng.randrange(40)}
                doc = {"uri": uri}
                params = {"textDocument": doc, "position": position}
                if method == "textDocument/references":
                    params["context"] = {"includeDeclaration": True}
                elif method == "textDocument/rename":
                    params["newName"] = "renamed_name"
                elif method in ("textDocument/documentSymbol", "textDocument/semanticTokens/full"):
                    params = {"textDocument": doc}
                elif method == "textDocument/formatting":
                    params = {"textDocument": doc, "options": {"tabSize": 2, "insertSpaces": True}}
                elif method == "textDocument/rangeFormatting":
                    end = {"line": position["line"] + 2, "character": 0}
                    params = {"textDocument": doc, "range": {"start": position, "end": end},
                              "options": {"tabSize": 2, "insertSpaces": True}}
                elif method == "textDocument/codeAction":
                    everything = {"start": {"line": 0, "character": 0}, "end": {"line": len(lines), "character": 0}}
                    params = {"textDocument": doc, "range": everything, "context": {"diagnostics": []}}
                try:
                    await raw_request(c.protocol, method, params)
                    answered += 1
                except JsonRpcException as e:
                    # Refusals (a text that does not parse cannot be
                    # formatted, nothing to rename) are answers too.
                    answered += 1
                    if e.code == -32603:
                        internal.append({"file": path.name, "method": method, "message": str(e), "text": t})
        c.text_document_did_close(types.DidCloseTextDocumentParams(text_document=types.TextDocumentIdentifier(uri=uri)))
    return {"files": len(files), "answered": answered, "internal_errors": internal}


_TEMP = None


def tempfile_dir():
    """A folder for the mangled documents' names (nothing is written)."""
    global _TEMP
    if _TEMP is None:
        import tempfile

        _TEMP = tempfile.mkdtemp()
    return _TEMP


async def run(binary, folder):
    s = Session(binary, folder)
    c = s.client
    await c.start_io(binary, "lsp")
    init = await c.initialize_async(
        types.InitializeParams(
            process_id=None,
            root_uri=Path(folder).resolve().as_uri(),
            capabilities=types.ClientCapabilities(
                text_document=types.TextDocumentClientCapabilities(
                    publish_diagnostics=types.PublishDiagnosticsClientCapabilities(related_information=True)
                )
            ),
        )
    )
    s.record["capabilities"] = as_json(init.capabilities)
    c.initialized(types.InitializedParams())

    c.text_document_did_open(
        types.DidOpenTextDocumentParams(
            text_document=types.TextDocumentItem(uri=s.uri, language_id="mech", version=1, text=s.text)
        )
    )
    await s.snapshot("opened")

    # A typo in a used file's name, then its did-you-mean fix.
    at = s.pos("with kcat")
    start = types.Position(line=at.line, character=at.character + 5)
    end = types.Position(line=at.line, character=at.character + 9)
    await s.change([(types.Range(start=start, end=end), "kcta")])
    diagnostics = await s.snapshot("typo")
    unknown = [d for d in diagnostics if d.code == "E0201"]
    actions = await s.actions_at(unknown[0])
    s.record["typo_actions"] = [a.title for a in actions]
    replace = [a for a in actions if a.title.startswith("Replace with")]
    await s.apply_action(replace[0])
    await s.snapshot("typo fixed by its code action")

    # Half-typed: a step typed a few characters at a time; every feature is
    # asked at each state and must answer (no internal error, no crash).
    end_line = len(s.text.rstrip("\n").split("\n"))
    typed = ""
    for piece in ["st", "ep", " gr", "ow ", "ES", " -", "> ", "ES", " + ", "Q ", "wi", "th", " k", "cat"]:
        p = types.Position(line=end_line, character=len(typed))
        prefix = "\n" if typed == "" and not s.text.endswith("\n") else ""
        await s.change([(types.Range(start=p, end=p), prefix + piece)])
        typed += piece
        state = {"version": s.version, "text": s.text}
        here = types.Position(line=end_line, character=len(typed))
        try:
            state["hover"] = await s.hover("species S", delta=8)
            comp = await c.text_document_completion_async(
                types.CompletionParams(text_document=s.doc(), position=here)
            )
            state["completion"] = [i.label for i in (comp.items if hasattr(comp, "items") else comp or [])][:5]
            tokens = await c.text_document_semantic_tokens_full_async(types.SemanticTokensParams(text_document=s.doc()))
            state["tokens"] = len(tokens.data)
            symbols = await c.text_document_document_symbol_async(types.DocumentSymbolParams(text_document=s.doc()))
            state["symbols"] = len(symbols or [])
            state["definition"] = as_json(
                await c.text_document_definition_async(
                    types.DefinitionParams(text_document=s.doc(), position=types.Position(line=end_line, character=max(0, len(typed) - 1)))
                )
            )
            state["error"] = None
        except JsonRpcException as e:
            state["error"] = f"{e.code}: {e}"
        s.record["half_typed"].append(state)
    diagnostics = await s.snapshot("a step naming an unknown species")
    unknown = [d for d in diagnostics if d.code == "E0201"]
    actions = await s.actions_at(unknown[0])
    s.record["species_actions"] = [a.title for a in actions]
    declare = [a for a in actions if a.title.startswith("Declare")]
    await s.apply_action(declare[0])
    await s.snapshot("unknown species declared by its code action")

    # A reversible step losing its reverse constant, then the fix.
    at = s.pos(", km1")
    await s.change([(types.Range(start=at, end=types.Position(line=at.line, character=at.character + 5)), "")])
    diagnostics = await s.snapshot("no reverse constant")
    missing = [d for d in diagnostics if d.code == "E0401"]
    actions = await s.actions_at(missing[0])
    s.record["reverse_actions"] = [a.title for a in actions]
    await s.apply_action(actions[0])
    await s.snapshot("reverse constant added by its code action")

    # Hover on every kind of name, including those from lib.mech.
    s.record["hover"] = {
        "S": await s.hover("species S", delta=8),
        "k1": await s.hover("param k1", delta=6),
        "bind": await s.hover("step bind", delta=5),
        "E_t": await s.hover("total E_t", delta=6),
        "E": await s.hover("E + S"),
        "kcat": await s.hover("with kcat", delta=5),
        "A340": await s.hover("observe A340", delta=8),
    }
    s.record["hover_text"] = s.text

    # Go to definition and references across the used file.
    d = await c.text_document_definition_async(
        types.DefinitionParams(text_document=s.doc(), position=s.pos("E + S"))
    )
    s.record["definition_E"] = as_json(d)
    refs = await c.text_document_references_async(
        types.ReferenceParams(
            text_document=s.doc(),
            position=s.pos("E + S"),
            context=types.ReferenceContext(include_declaration=True),
        )
    )
    s.record["references_E"] = as_json(refs)
    s.record["lib_text"] = s.lib.read_text()

    # Rename a name declared in lib.mech, with lib.mech open too.
    c.text_document_did_open(
        types.DidOpenTextDocumentParams(
            text_document=types.TextDocumentItem(uri=s.lib_uri, language_id="mech", version=1, text=s.record["lib_text"])
        )
    )
    await s.diagnostics_for(1, s.lib_uri)
    prepared = await c.text_document_prepare_rename_async(
        types.PrepareRenameParams(text_document=s.doc(), position=s.pos("with kcat", delta=5))
    )
    s.record["prepare_rename"] = as_json(prepared)
    edit = await c.text_document_rename_async(
        types.RenameParams(text_document=s.doc(), position=s.pos("with kcat", delta=5), new_name="k_cat")
    )
    s.record["rename"] = as_json(edit)
    try:
        await c.text_document_rename_async(
            types.RenameParams(text_document=s.doc(), position=s.pos("with kcat", delta=5), new_name="k1")
        )
        s.record["rename_to_taken"] = None
    except JsonRpcException as e:
        s.record["rename_to_taken"] = {"code": e.code, "message": str(e)}

    # Completion in three places.
    async def complete(position):
        comp = await c.text_document_completion_async(types.CompletionParams(text_document=s.doc(), position=position))
        items = comp.items if hasattr(comp, "items") else comp
        return [{"label": i.label, "kind": int(i.kind) if i.kind else None, "detail": i.detail} for i in items]

    obs = s.pos("observe A340 = ", delta=len("observe A340 = "))
    s.record["completion_names"] = await complete(obs)
    at = s.pos("species S = 2", delta=len("species S = 2 "))
    s.record["completion_units"] = await complete(at)
    s.record["completion_keywords"] = await complete(types.Position(line=at.line, character=0))

    # Symbols and semantic tokens of the current text.
    symbols = await c.text_document_document_symbol_async(types.DocumentSymbolParams(text_document=s.doc()))
    s.record["symbols"] = as_json(symbols)
    tokens = await c.text_document_semantic_tokens_full_async(types.SemanticTokensParams(text_document=s.doc()))
    s.record["tokens"] = list(tokens.data)
    s.record["tokens_text"] = s.text

    # Versions: a request naming a kept earlier version is answered from
    # that text; one naming a version no longer held is refused.
    old = s.record["snapshots"][-2]
    s.record["old_version"] = old["version"]
    hover_params = lambda version, needle, text: {
        "textDocument": {"uri": s.uri, "version": version},
        "position": CONVERTER.unstructure(position_of(text, needle)),
    }
    answer = await raw_request(c.protocol, "textDocument/hover", hover_params(old["version"], "km1", old["text"]))
    s.record["old_version_hover"] = None if answer is None else CONVERTER.unstructure(answer)
    try:
        await raw_request(c.protocol, "textDocument/hover", hover_params(1, "S", s.text))
        s.record["gone_version"] = None
    except JsonRpcException as e:
        s.record["gone_version"] = {"code": e.code, "message": str(e)}

    # A change naming an older version is not applied.
    before = s.text
    c.text_document_did_change(
        types.DidChangeTextDocumentParams(
            text_document=types.VersionedTextDocumentIdentifier(uri=s.uri, version=2),
            content_changes=[types.TextDocumentContentChangeWholeDocument(text="species Stale\n")],
        )
    )
    s.record["after_stale_change_hover"] = await s.hover("species S", delta=8)
    s.record["after_stale_change_text"] = before

    # Formatting: a misaligned text, the whole document and a range.
    messy = s.text.replace("param k1 = 5 /uM/s", "param   k1 =  5 /uM/s").replace("species ES", "species    ES")
    await s.change([(full_range(s.text), messy)])
    await s.diagnostics_for(s.version)
    edits = await c.text_document_formatting_async(
        types.DocumentFormattingParams(text_document=s.doc(), options=types.FormattingOptions(tab_size=4, insert_spaces=True))
    )
    s.record["format_before"] = s.text
    s.record["format_whole"] = apply_edits(s.text, edits or [])
    k1 = s.pos("param   k1").line
    rng = types.Range(start=types.Position(line=k1, character=0), end=types.Position(line=k1, character=3))
    edits = await c.text_document_range_formatting_async(
        types.DocumentRangeFormattingParams(text_document=s.doc(), range=rng, options=types.FormattingOptions(tab_size=4, insert_spaces=True))
    )
    s.record["format_range_line"] = k1
    s.record["format_range"] = apply_edits(s.text, edits or [])

    # Every model and fixture, mangled (cut short, a span deleted, a stray
    # token inserted, characters dropped), with every request at random
    # places: each must be answered, none with an internal error.
    s.record["mangled"] = await mangled_models(c)

    await c.shutdown_async(None)
    c.exit(None)
    await asyncio.wait_for(c._server.wait(), 30)
    s.record["exit_code"] = c._server.returncode
    await c.stop()
    print(json.dumps(s.record))


if __name__ == "__main__":
    asyncio.run(run(sys.argv[1], sys.argv[2]))
