"""Chunked, resumable execution of a table-producing job; no physics here.

A job is a picklable ``fn(plan, index)`` that returns chunk ``index`` of a table.
This module runs the chunks in-process or on an executor (a bounded window of
pending futures), shows progress, and — when the table is streamed to disk —
keeps every finished chunk as a part file in a work folder beside the output,
resumes from them, and writes the final CSV + JSON sidecar atomically.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import os
import re
import shutil
from collections import deque
from contextlib import closing
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from .._version import version as _package_version
from .._errors import NanoabsError

PARTS_FORMAT = "nanoabs-sweep-parts"
#: Seconds a run must last before its progress bar appears.
_PROGRESS_DELAY_S = 0.5


def progress_bar(total, label, enabled=True):
    """A tqdm bar on stderr (notebook widget where available) that appears after ``_PROGRESS_DELAY_S``.

    ``enabled``: True always shows it, False never, None only when stderr is a terminal.
    """
    from tqdm.auto import tqdm

    return tqdm(total=max(int(total), 1), desc=label, disable=None if enabled is None else not enabled,
                delay=_PROGRESS_DELAY_S, leave=True, dynamic_ncols=True)


def unique(items):
    """``items`` without repeats, first occurrence kept (items need not be hashable)."""
    out = []
    for x in items:
        if x not in out:
            out.append(x)
    return out


def collapse(warnings, limit=30):
    """Unique warnings; messages that differ only in their numbers are kept once with a count."""
    groups = {}
    for w in warnings:
        groups.setdefault(re.sub(r"\d+(\.\d+)?(e[-+]?\d+)?", "#", w), []).append(w)
    out = []
    for ws in groups.values():
        ws = sorted(set(ws))
        out.append(ws[0] + (f" (and {len(ws) - 1} similar)" if len(ws) > 1 else ""))
    out.sort()
    return out[:limit] + ([f"... {len(out) - limit} more kinds of warning"] if len(out) > limit else [])


def atomic_write_text(path: Path, text: str):
    from ..export import write_file_atomic

    write_file_atomic(path, lambda fh: fh.write(text), force=True)


def csv_text(frame) -> str:
    """The frame as CSV text, byte-identical to ``frame.to_csv(index=False, na_rep="nan",
    lineterminator="\n")`` for numeric and text columns (shortest round-trip float repr,
    minimal quoting) and about twice as fast."""
    def quote(x):
        return '"' + x.replace('"', '""') + '"' if any(ch in x for ch in ',"\n\r') else x

    header = ",".join(quote(str(c)) for c in frame.columns) + "\n"
    if len(frame) == 0:
        return header
    cols = []
    for c in frame.columns:
        v = frame[c].to_numpy()
        if v.dtype.kind in "fiu":
            cols.append(map(repr, v.tolist()))
        else:
            text = list(map(str, v.tolist()))
            quoted = {x: quote(x) for x in set(text)}
            cols.append(map(quoted.__getitem__, text))
    return header + "\n".join(map(",".join, zip(*cols))) + "\n"


# =============================================================================
# executors
# =============================================================================


def _window(executor):
    n = getattr(executor, "_max_workers", None)
    if n is None and callable(getattr(executor, "nthreads", None)):
        try:
            n = sum(executor.nthreads().values())
        except Exception:  # noqa: BLE001 - any executor-like object
            n = None
    return max(4, 2 * int(n or 4))


def run_chunks(executor, fn, plan, todo):
    """Yield (index, fn(plan, index)) in the order of ``todo``; at most a window of chunks is pending."""
    if executor is None:
        for i in todo:
            yield i, fn(plan, i)
        return
    own = False
    if isinstance(executor, str):
        if executor not in ("processes", "process"):
            raise NanoabsError(f"executor = {executor!r}: allowed are None, 'processes' or an object with "
                               ".submit(fn, *args) (concurrent.futures executor, dask.distributed.Client)")
        import os
        from concurrent.futures import ProcessPoolExecutor

        executor = ProcessPoolExecutor(max_workers=2, initializer=_exit_with_parent, initargs=(os.getpid(),))
        own = True
    elif not callable(getattr(executor, "submit", None)):
        raise NanoabsError(f"executor = {type(executor).__name__}: must be None, 'processes' or an object with "
                           ".submit(fn, *args) returning futures with .result()")
    pending = deque()
    it = iter(todo)
    try:
        for i in itertools.islice(it, _window(executor)):
            pending.append((i, executor.submit(fn, plan, i)))
        while pending:
            i, fut = pending.popleft()
            res = fut.result()
            nxt = next(it, None)
            if nxt is not None:
                pending.append((nxt, executor.submit(fn, plan, nxt)))
            yield i, res
    finally:
        for _, fut in pending:
            cancel = getattr(fut, "cancel", None)
            if callable(cancel):
                try:
                    cancel()
                except Exception:  # noqa: BLE001 - best effort on shutdown
                    pass
        if own:
            executor.shutdown(wait=True, cancel_futures=True)


class NoBar:
    """A progress bar that shows nothing (tasks running on worker threads)."""

    def update(self, n=1):
        pass


def thread_pool(workers, warm_up=None):
    """A pool of min(``workers``, usable cores) threads, or None for one; ``warm_up()`` runs first,
    in the calling thread (load what the threads would otherwise race to load)."""
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    if min(workers, cores) < 2:
        return None
    from concurrent.futures import ThreadPoolExecutor

    if warm_up is not None:
        warm_up()
    return ThreadPoolExecutor(max_workers=min(workers, cores))


def map_ordered(pool, fn, items, bar, step):
    """[fn(item) for item in items], on the pool's threads when there is a pool; results in order,
    ``bar.update(step)`` as each is collected."""
    items = list(items)
    if pool is None or len(items) < 2:
        out = []
        for item in items:
            out.append(fn(item))
            bar.update(step)
        return out
    futures = [pool.submit(fn, item) for item in items]
    out = []
    for f in futures:
        out.append(f.result())
        bar.update(step)
    return out


def _exit_with_parent(parent_pid, period_s=1.0):
    """In a pool worker: exit when the process that started the pool is gone (killed, not shut down)."""
    import os
    import threading
    import time

    def watch():
        while os.getppid() == parent_pid:
            time.sleep(period_s)
        os._exit(1)

    threading.Thread(target=watch, daemon=True, name="nanoabs-parent-watch").start()


def executor_name(executor):
    if executor is None:
        return "in-process"
    if isinstance(executor, str):
        return "ProcessPoolExecutor(max_workers=2)"
    return type(executor).__name__


# =============================================================================
# the work folder: one part file per finished chunk
# =============================================================================


def part_paths(workdir: Path, i: int):
    return workdir / f"chunk_{i:06d}.csv", workdir / f"chunk_{i:06d}.json"


def prepare_workdir(workdir: Path, digest: str, n_chunks, force, chunk_rows, **manifest_extra):
    """Create or reuse the work folder; the set of chunk indices already finished and valid.

    ``digest`` identifies everything that determines the numbers (see the resume rule in
    :func:`nanoabs.design.sweep`). A work folder of another identity is refused unless
    ``force`` (then discarded). A part file is accepted only if its own sidecar records
    the same identity, the row count ``chunk_rows(i)`` and the SHA-256 of the CSV bytes;
    any other part (truncated, edited, of another run) is deleted and recomputed.
    """
    manifest = workdir / "manifest.json"
    if workdir.exists() and not workdir.is_dir():
        raise NanoabsError(f"work directory {str(workdir)!r} exists and is a file: remove it or choose another "
                           "out path")
    if workdir.exists():
        try:
            doc = json.loads(manifest.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            doc = None
        if not isinstance(doc, dict) or doc.get("format") != PARTS_FORMAT:
            raise NanoabsError(f"work directory {str(workdir)!r} exists and is not a nanoabs sweep work "
                               "directory: remove it or choose another out path")
        if doc.get("hash") != digest:
            if not force:
                raise NanoabsError(f"work directory {str(workdir)!r} holds chunks of a sweep with different "
                                   "arguments or input data (material tables, package version): pass "
                                   "force=True (CLI: --force) to discard them, or choose another out path")
            shutil.rmtree(workdir)
    if not workdir.exists():
        workdir.mkdir()
        atomic_write_text(manifest, json.dumps({
            "format": PARTS_FORMAT, "format_version": 2, "hash": digest, "n_chunks": n_chunks, **manifest_extra,
            "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
            "package_version": _package_version()}, indent=2) + "\n")
    for tmp in workdir.glob(".*.tmp"):  # left by a killed writer; we hold the lock
        tmp.unlink(missing_ok=True)
    finished = set()
    for i in range(n_chunks):
        if _part_is_valid(workdir, i, digest, chunk_rows(i)):
            finished.add(i)
        else:
            for path in part_paths(workdir, i):
                path.unlink(missing_ok=True)
    return finished


def _part_is_valid(workdir, i, digest, rows):
    csv_path, info_path = part_paths(workdir, i)
    try:
        info = json.loads(info_path.read_text(encoding="utf-8"))
        data = csv_path.read_bytes()
    except (OSError, ValueError):
        return False
    return (isinstance(info, dict) and info.get("identity") == digest and info.get("rows") == rows
            and info.get("sha256") == hashlib.sha256(data).hexdigest())


def write_part(workdir: Path, i: int, text, info, *, identity, rows):
    """Chunk ``i`` as a part file plus its sidecar (identity, row count, SHA-256 of the CSV bytes)."""
    csv_path, info_path = part_paths(workdir, i)
    data = text.encode("utf-8")
    doc = {**info, "identity": identity, "rows": int(rows), "sha256": hashlib.sha256(data).hexdigest()}
    atomic_write_text(info_path, json.dumps(doc) + "\n")  # the CSV appearing marks the chunk finished
    atomic_write_text(csv_path, text)


def read_part(workdir: Path, i: int, *, text_columns=(), int_columns=()):
    """A finished chunk back from disk; numbers parsed by Python's correctly rounded float()."""
    import pandas as pd

    csv_path, info_path = part_paths(workdir, i)
    raw = pd.read_csv(csv_path, dtype=str, keep_default_na=False)
    data = {}
    for c in raw.columns:
        text = raw[c].to_numpy(dtype=object)
        if c in text_columns:
            data[c] = text
        elif c in int_columns:
            data[c] = text.astype(np.int64)
        else:
            data[c] = np.array([float(v) for v in text], dtype=float)
    frame = pd.DataFrame(data, columns=list(raw.columns))
    for c in text_columns:
        if c in frame:
            frame[c] = frame[c].astype(str)
    return frame, json.loads(info_path.read_text(encoding="utf-8"))


def write_final(out: Path, workdir: Path, n_chunks: int, frame0, units, metadata, rows, force):
    """Concatenate the part files into ``out`` and write its JSON sidecar, both atomically."""
    from .. import export

    targets = export.check_writable(out, force=force)
    columns = export._check_frame(frame0, units)
    doc = {
        "format": export.FORMAT_NAME, "format_version": export.FORMAT_VERSION,
        "package_version": _package_version(),
        "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "data_file": targets[0].name, "rows": int(rows), "columns": columns,
        "metadata": export._jsonable(metadata, ""),
    }
    header = ",".join(c["name"] for c in columns) + "\n"

    def write_csv(fh):
        fh.write(header)
        for i in range(n_chunks):
            with open(part_paths(workdir, i)[0], encoding="utf-8", newline="") as part:
                first = part.readline()
                if first != header:
                    raise NanoabsError(f"part file of chunk {i} has columns {first.strip()!r}, expected "
                                       f"{header.strip()!r}: remove {str(workdir)!r} and run again")
                shutil.copyfileobj(part, fh)

    return export.place_together([(targets[0], write_csv),
                                  (targets[1], lambda fh: fh.write(export._json_text(doc, None)))])


def collect(fn, plan, n_chunks, *, executor=None, progress=True, label="", workdir=None, identity=None,
            finished=(), keep=True, read_kw=None):
    """Run the chunks not yet ``finished`` and gather every chunk's result in index order.

    ``fn(plan, i)`` returns (frame, info dict, CSV text or None); ``info["rows"]`` is the
    chunk's row count when the frame is cut short. With a ``workdir`` each new chunk is
    written there as a part file (recorded with ``identity``) as it arrives, and ``finished``
    chunks are read back from it (``read_kw``: see :func:`read_part`). Returns
    (frames, first rows, infos): the list of chunk frames (None unless ``keep``),
    a one-row frame with the columns and dtypes, and the list of chunk infos.
    """
    frames, infos = {}, {}
    frame0 = None
    todo = [i for i in range(n_chunks) if i not in finished]
    bar = progress_bar(n_chunks, label, progress)
    bar.update(len(finished))

    def take(i, frame, info):
        nonlocal frame0
        if keep:
            frames[i] = frame
        if frame0 is None:
            frame0 = frame.head(1)
        infos[i] = info

    try:
        with closing(run_chunks(executor, fn, plan, todo)) as results:
            for i, (frame, info, text) in results:
                if workdir is not None:
                    write_part(workdir, i, text if text is not None else csv_text(frame), info,
                               identity=identity, rows=info.get("rows", len(frame)))
                take(i, frame, info)
                bar.update()
    finally:
        bar.close()
    for i in sorted(finished):
        take(i, *read_part(workdir, i, **(read_kw or {})))
    return ([frames[i] for i in range(n_chunks)] if keep else None), frame0, [infos[i] for i in range(n_chunks)]
