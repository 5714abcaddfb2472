# The cached way through the pipeline: a file's results (report JSON, typed
# summaries, diagnostics) from the result cache where the keys match, from
# the driver (pipeline.compute_missing) for the nests that miss.
#
# A file whose exact text was seen is one "file" entry: no parsing at all.
# Otherwise the front end finds the nests and their keys (cachekeys.py); when
# every entry is present the file is assembled from them, with positions
# moved to where the same tokens now are. Only then is anything computed, so
# a warm run never imports islpy or the engine: pipeline is imported only on
# a miss. `analyze`, `check` and the language server all read files here;
# the text report of `analyze` is kept per file (text_of_path).

from __future__ import annotations

from typing import Any

from tripcount import cachekeys as keys
from tripcount.cache import Store
from tripcount.compdb import source_inputs
from tripcount.options import Options
from tripcount.report.text import RenderedFile, render_file
from tripcount.sources import decode_source, read_bytes


def locate(text: str, path: str, options: Options,
           inputs: tuple[Any, str, str | None, str | None] | None = None) -> keys.Layout:
    """Parse `text` with the front end and compute the cache keys of its nests.

    The keys include the build flags and the bytes of every header the file
    may read (compdb.source_inputs, passed as `inputs` when already computed),
    so a changed header is a miss.
    """
    from tripcount.diagnostics.source import BuildFlagsUnreadable
    from tripcount.frontend import parse_text
    from tripcount.ir import Span

    includes, inputs_key, problem, lang = inputs or source_inputs(path, text, options)
    unit, diags = parse_text(text, path=path, snippet=False, includes=includes, lang=lang)
    if problem is not None:
        diags = [BuildFlagsUnreadable(Span.point(1, 1), reason=problem), *diags]
    return keys.layout_of(text, unit, diags, options, inputs_key)


def analyze_file_uncached(path: str, text: str, options: Options) -> dict[str, Any]:
    """The file JSON straight from the pipeline (no cache), with the nests' summaries."""
    from tripcount.pipeline import file_payload

    return file_payload(path, text, options)


def analyze_path_cached(path: str, options: Options, use_cache: bool = True) -> dict[str, Any]:
    """The file JSON (jsonout.file_json form) of the file at `path`, from the cache where possible.

    An unreadable file gives the pipeline's file-level diagnostic; invalid
    UTF-8 is reported first, as the pipeline does.
    """
    try:
        text, bad = read_source(path)
    except (OSError, ValueError):
        from tripcount.pipeline import analyze_file
        from tripcount.report.jsonout import file_json

        return file_json(analyze_file(path, options))
    out = analyze_file_cached(path, text, options, use_cache=use_cache)
    out = {k: v for k, v in out.items() if k != "summaries"}
    if bad is not None:
        out["diagnostics"] = keys.sort_diags([bad, *out["diagnostics"]])
    return out


def analyze_file_cached(path: str, text: str, options: Options, use_cache: bool = True,
                        store: Store | None = None) -> dict[str, Any]:
    """The file JSON (jsonout.file_json form) of `text`, from the cache where possible.

    Only nests whose entries are missing are analyzed (this imports islpy
    and the engine); the rest is assembled from the cache with positions
    moved to where the same tokens now are.
    """
    if text.startswith("\ufeff"):
        text = text[1:]  # the front end drops a byte-order mark too; columns must agree
    if not use_cache:
        return analyze_file_uncached(path, text, options)
    store = store or Store()
    if not store.enabled:
        return analyze_file_uncached(path, text, options)
    inputs = source_inputs(path, text, options)  # flags and header bytes: read once per file
    fkey = keys.file_key(text, options, inputs[1])
    hit = store.get("file", fkey)
    if hit is not None and isinstance(hit.get("file"), dict):
        return {"path": path, **{k: v for k, v in hit["file"].items() if k != "path"}}
    layout = locate(text, path, options, inputs)
    result = keys.assemble(layout, store)
    if result is None:
        from tripcount.pipeline import compute_missing

        result = compute_missing(layout, path, options, store)
        _prune_once(store)
    out = {"path": path, "nests": result[0], "summaries": result[1], "diagnostics": keys.sort_diags(result[2])}
    if result[3]:  # every part is cacheable
        store.put("file", fkey, {"file": {"nests": out["nests"], "summaries": out["summaries"],
                                          "diagnostics": out["diagnostics"]}})
    return out


_PRUNED = False


def _prune_once(store: Store) -> None:
    """Keep the cache under its cap; checked after computing (already slow), once per process."""
    global _PRUNED
    if not _PRUNED:
        _PRUNED = True
        store.prune()



def text_of_path(path: str, options: Options, use_cache: bool = True, store: Store | None = None) -> RenderedFile:
    """The text report of the file at `path`, from the cache when the same path, text,
    build inputs and options were reported before; else analysed (pipeline) and kept
    unless a time limit cut a result short. --verify always runs afresh."""
    key = data = None
    store = (store or Store()) if use_cache and not options.verify else None
    if store is not None and store.enabled:
        try:
            data = read_bytes(path)
        except (OSError, ValueError):
            pass  # the pipeline reports it
        if data is not None:
            text, _bad = decode_source(data)
            key = keys.text_key(path, text, options, source_inputs(path, text, options)[1])
            hit = store.get("text", key)
            if hit is not None:
                return RenderedFile.from_json(hit["report"], path)
    # only on a miss: a hit loads neither islpy nor the engine
    from tripcount.pipeline import analyze_file

    fr = analyze_file(path, options, data)
    rendered = render_file(fr)
    if key is not None and store is not None and not fr.time_cut() and not any(
            keys.depends_on_time(d.to_dict()) for d in fr.all_diagnostics()):
        store.put("text", key, {"report": rendered.to_json()})
        _prune_once(store)
    return rendered


def read_source(path: str) -> tuple[str, dict[str, Any] | None]:
    """Read a C file as UTF-8; invalid bytes are replaced and reported (diagnostic dict).

    Raises OSError when the file cannot be read.
    """
    data = read_bytes(path)
    text, diag = decode_source(data)
    return text, None if diag is None else diag.to_dict()
