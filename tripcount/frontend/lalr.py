# Front end: the LALR parser of grammar/loops.lark (lark), fed with tokens made
# beforehand, and the fast loop over its parse table.
#
# The loop (_Driver) reads lark's parse table and callbacks, which are not
# lark's public API; it is kept because the public ways are slower: reading
# the bundled corpus plus a 20,000-line generated file took 1.16 s with it,
# 1.53 s with `Lark.parse` (+32%) and 2.40 s with lark's interactive parser
# (measured on the 2-core development machine, best of three, warm grammar
# cache). pyproject.toml pins the lark versions whose table layout was
# checked (1.1.9, 1.2.2, 1.3.1); tests/test_lalr.py fails when the loop is not
# in use and checks that it reads every test input as `Lark.parse` does. With
# any other table layout the engine falls back to `Lark.parse`.

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import sys
import threading
from pathlib import Path

from lark import Lark, Token
from lark import __version__ as lark_version
from lark.exceptions import UnexpectedInput
from lark.lexer import Lexer

from tripcount.diagnostics import Phrase
from tripcount.frontend.build import IRBuilder
from tripcount.ir import Span
from tripcount.paths import cache_dir


class ParseFailure(Exception):
    """A token range the grammar could not read; `reason` says why."""

    def __init__(self, reason: str | Phrase, token: Token | None = None) -> None:
        super().__init__(str(reason))
        self.reason = reason
        self.token = token


class _ListLexer(Lexer):
    """The parser's lexer: the tokens were made beforehand, so it hands them over."""

    def __init__(self, lexer_conf: object) -> None:
        pass

    def lex(self, data: list[Token]):  # type: ignore[override]
        return iter(data)


def _grammar_text() -> str:
    try:
        from importlib import resources

        return resources.files("tripcount.grammar").joinpath("loops.lark").read_text("utf-8")
    except (ImportError, FileNotFoundError, OSError, TypeError):
        # source checkout: the grammar lives in the repository's grammar/ directory
        return (Path(__file__).resolve().parents[2] / "grammar" / "loops.lark").read_text("utf-8")


class _Driver:
    """The LALR loop over lark's parse table and callbacks, written out.

    lark's own loop does the same work through a method call per token, and
    its table is keyed by grammar objects whose comparisons run Python code.
    A file is hundreds of thousands of tokens, so the table is copied once
    into plain dictionaries (string keys; reductions carry their size, goto
    symbol and callback) and the loop below runs over it. If lark's internals
    ever differ, the engine falls back to `Lark.parse`.
    """

    def __init__(self, lark: Lark) -> None:
        from lark.parse_tree_builder import ExpandSingleChild
        from lark.parsers.lalr_analysis import Shift

        inner = lark.parser.parser.parser  # ParsingFrontend -> LALR_Parser -> _Parser
        table = inner.parse_table
        callbacks = inner.callbacks
        reduce_info: dict[int, tuple] = {}
        self.states: dict = {}
        for state, row in table.states.items():
            new_row = {}
            for sym, (action, arg) in row.items():
                if action is Shift:
                    new_row[str(sym)] = (True, arg)
                    continue
                info = reduce_info.get(id(arg))
                if info is None:
                    cb = callbacks[arg]
                    size = len(arg.expansion)
                    if type(cb) is ExpandSingleChild and size == 1:
                        cb = None  # `?rule` with one child: the child itself
                    info = (size, str(arg.origin.name), cb)
                    reduce_info[id(arg)] = info
                new_row[str(sym)] = (False, info)
            self.states[state] = new_row
        self.start_states = {str(k): v for k, v in table.start_states.items()}
        self.end_states = {str(k): v for k, v in table.end_states.items()}

    def parse(self, tokens: list[Token], start: str):
        states = self.states
        state_stack = [self.start_states[start]]
        value_stack: list = []
        push_state = state_stack.append
        push_value = value_stack.append

        def reduce(size: int, origin: str, cb) -> None:
            if cb is None:
                state_stack.pop()
            else:
                if size:
                    children = value_stack[-size:]
                    del state_stack[-size:]
                    del value_stack[-size:]
                else:
                    children = []
                push_value(cb(children))
            push_state(states[state_stack[-1]][origin][1])

        for tok in tokens:
            ty = tok.type
            while True:
                try:
                    is_shift, arg = states[state_stack[-1]][ty]
                except KeyError:
                    raise ParseFailure(_describe(tok), tok) from None
                if is_shift:
                    push_state(arg)
                    push_value(tok)
                    break
                reduce(*arg)
        end_state = self.end_states[start]
        while True:
            try:
                is_shift, arg = states[state_stack[-1]]["$END"]
            except KeyError:
                raise ParseFailure(_describe(None)) from None
            if is_shift:
                raise ParseFailure(_describe(None))
            reduce(*arg)
            if state_stack[-1] == end_state:
                return value_stack[-1]


_LARK_OPTIONS = dict(parser="lalr", lexer=_ListLexer, keep_all_tokens=True, maybe_placeholders=True,
                     start=["body_start", "item_start", "expr_start", "decl_start"])


# Options of the compiled grammar that are code (classes, objects), never
# stored: the loader puts back the ones the parser needs.
_CODE_OPTIONS = ("lexer", "transformer", "postlex", "tree_class", "lexer_callbacks", "edit_terminals", "_plugins")
_MAX_TABLE_BYTES = 32 << 20
_MAX_DEPTH = 64


def _encode(x: object, depth: int = 0) -> object:
    """lark's serialized parser (dicts with int keys, tuples, lists, scalars) as
    plain JSON: a dict becomes {"m": [[key, value], ...]}, a tuple {"t": [...]}."""
    if depth > _MAX_DEPTH:
        raise ValueError("too deep")
    if x is None or isinstance(x, (bool, int, str)):
        return x
    if isinstance(x, list):
        return [_encode(v, depth + 1) for v in x]
    if isinstance(x, tuple):
        return {"t": [_encode(v, depth + 1) for v in x]}
    if isinstance(x, dict):
        return {"m": [[_encode(k, depth + 1), _encode(v, depth + 1)] for k, v in x.items()]}
    raise TypeError(f"not data: {type(x).__name__}")


def _decode_object(obj: dict) -> object:
    """json's object hook, the inverse of _encode: {"t": [...]} is a tuple, {"m":
    [[key, value], ...]} a dict (a pair that is not two items, or an unhashable
    key, raises; the caller treats that as a damaged file)."""
    if len(obj) == 1:
        if isinstance(obj.get("t"), list):
            return tuple(obj["t"])
        if isinstance(obj.get("m"), list):
            return dict(obj["m"])
    return obj


def _save_tables(lark: Lark, path: str, key: str) -> None:
    """Write the parser tables as JSON under `path` (atomically: a private name, then rename)."""
    from lark.grammar import Rule
    from lark.lexer import TerminalDef

    data, memo = lark.memo_serialize([TerminalDef, Rule])
    data = dict(data)
    data["options"] = {k: v for k, v in data["options"].items() if k not in _CODE_OPTIONS}
    data["parser"] = dict(data["parser"])
    data["parser"]["lexer_conf"] = {k: v for k, v in data["parser"]["lexer_conf"].items() if k != "lexer_type"}
    text = json.dumps({"key": key, "data": _encode(data), "memo": _encode(memo)}, separators=(",", ":"))
    tmp = f"{path}.{os.getpid()}.tmp"
    with open(tmp, "w", encoding="utf-8") as f:
        f.write(text)
    os.replace(tmp, path)


def _load_tables(path: str, key: str, builder: IRBuilder) -> Lark | None:
    """The parser from tables written by _save_tables, or None (missing, damaged,
    another key). Only data is read: JSON, decoded to dicts, lists and scalars,
    which lark rebuilds into its own classes by name from a fixed list (never a pickle, so a file placed
    in the cache directory cannot run code)."""
    try:
        if os.path.getsize(path) > _MAX_TABLE_BYTES:
            return None
        with open(path, encoding="utf-8") as f:
            doc = json.load(f, object_hook=_decode_object)
        if not isinstance(doc, dict) or doc.get("key") != key:
            return None
        data, memo = doc["data"], doc["memo"]
        if not isinstance(data, dict) or not isinstance(memo, dict) or not isinstance(data.get("options"), dict):
            return None
        data["options"] = {k: v for k, v in data["options"].items() if k not in _CODE_OPTIONS}
        data["options"]["lexer"] = _ListLexer
        data["parser"]["lexer_conf"]["lexer_type"] = _ListLexer
        lark = Lark._load_from_dict(data, memo, transformer=builder)
        if lark.options.parser != "lalr" or not lark.terminals:
            return None
        return lark
    except Exception:  # noqa: BLE001 - anything wrong with the file: compile afresh
        return None


def _compile(builder: IRBuilder) -> Lark:
    """The LALR parser of the grammar; its tables are kept in the cache directory
    as JSON (about 0.2 s to compute, a few ms to load).

    The file is data only: lark's own cache format is a pickle, and whoever
    can write the cache directory (a restored CI cache, a shared directory)
    would run code in every later command. The key (grammar text, lark and
    Python versions) is stored in the file and checked when it is loaded; a
    missing, damaged or stale file is only a miss (recompiled, rewritten), an
    unwritable directory means no grammar cache."""
    text = _grammar_text()
    key = hashlib.sha256(f"{text}\0{lark_version}\0{sys.version_info[:2]}".encode()).hexdigest()[:20]
    final = os.path.join(cache_dir(), f"grammar-{key}.json")
    loaded = _load_tables(final, key, builder)
    if loaded is not None:
        return loaded
    lark = Lark(text, transformer=builder, **_LARK_OPTIONS)
    with contextlib.suppress(Exception):
        os.makedirs(os.path.dirname(final), exist_ok=True)
        _save_tables(lark, final, key)
    return lark


class _Engine:
    """The compiled grammar, its callbacks, and the terminal names of keywords/punctuators."""

    def __init__(self) -> None:
        self.builder = IRBuilder()
        self.lark = _compile(self.builder)
        self.terms: dict[str, str] = {}
        for t in self.lark.terminals:
            if t.pattern.type == "str":
                self.terms[str(t.pattern.value)] = str(t.name)
        self.lock = threading.RLock()
        try:
            self.driver: _Driver | None = _Driver(self.lark)
        except (AttributeError, ImportError, KeyError, TypeError):
            self.driver = None

    def parse(self, tokens: list[Token], start: str):
        """Parse parser tokens from the rule `start`; ParseFailure when they do not fit."""
        if self.driver is not None:
            return self.driver.parse(tokens, start)
        try:
            return self.lark.parse(tokens, start=start)
        except UnexpectedInput as exc:
            tok = getattr(exc, "token", None)
            if tok is not None and tok.type == "$END":
                tok = None
            raise ParseFailure(_describe(tok), tok) from None


_ENGINE: _Engine | None = None
_ENGINE_LOCK = threading.Lock()


def engine() -> _Engine:
    """The shared parser, compiled on first use."""
    global _ENGINE
    if _ENGINE is None:
        with _ENGINE_LOCK:
            if _ENGINE is None:
                _ENGINE = _Engine()
    return _ENGINE


def _describe(tok: Token | None) -> str | Phrase:
    if tok is None or tok.type == "$END":
        return "it ends before the statement is complete"
    where = Span.point(tok.line, tok.column)
    if tok.type == "BAD":
        return Phrase((f"unexpected character '{tok}' at ", where))
    return Phrase((f"unexpected '{tok}' at ", where))
