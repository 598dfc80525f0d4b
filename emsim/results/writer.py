"""Stream simulation results into an HDF5 file while a run goes.

A :class:`ResultWriter` is the solver's sink: the solver hands it batches of
output rows and events, and the writer appends them to resizable, chunked,
compressed datasets. Nothing is accumulated in Python, so memory does not grow
with the length of a run.

File layout (format ``emsim-results``, version 1)::

    /                       attrs: format, format_version, status, error,
                                   emsim_version, created
    /time                   float64 (N,), attr unit = "second"
    /signals                attr names = column order (string array)
    /signals/<name>         float64 (N,), attr unit (SI, as pint prints it; "" for none)
    /events/time            float64 (E,)
    /events/component       int64 (E,)   index into the attr component_names
    /events/kind            int64 (E,)   code; attrs kind_codes/kind_names map it to a name
    /events/index           int64 (E,)   event number within the system
                            /events attrs: component_names, kind_codes, kind_names,
                                           event_names (optional labels)
    /meta/<key>             scalar UTF-8 string dataset holding JSON
    /energy/<key>           scalar float64 dataset, attr unit = "joule"   (written at close)
    /solver_stats           attrs, one per statistic                     (written at close)

Every signal dataset and ``/time`` are 1-D, ``maxshape=(None,)``, chunked and
compressed; the file is created with ``libver="latest"`` and switched to SWMR
(single writer, multiple readers) mode once all datasets exist, so readers
(:class:`emsim.results.Results` or plain h5py with ``swmr=True``) can follow
the file live. Rows are flushed to disk every ``flush_every`` seconds of wall
time, and on :meth:`ResultWriter.flush`.

Safety of earlier results
-------------------------
The writer never writes to the target path directly. It writes
``<target>.partial`` beside it and, only on ``close(ok=True)``, marks it
``status = "complete"`` and renames it atomically onto the target. On failure
(``close(ok=False)`` or an exception inside a ``with`` block) the partial file
is kept, marked ``status = "failed"`` with the error message, for diagnosis,
and the target path is left alone. **A failed run therefore never corrupts or
replaces an earlier good result.** A successful run does replace an earlier
emsim result at the same path; :func:`check_writable` refuses to replace a file
that is not an emsim result file at all.

Because the SWMR writer may not create new objects, the summary (``/energy``)
and solver statistics are written at close: the file leaves SWMR mode, is
reopened once for ordinary writing, completed, and then renamed.
"""
from __future__ import annotations

import datetime as _dt
import json
import math
import os
import tempfile
import time as _time
import warnings
from numbers import Integral, Real
from pathlib import Path

import h5py
import numpy as np

from ..errors import ResultsError

__all__ = ["ResultWriter", "check_writable", "partial_path", "FORMAT", "FORMAT_VERSION"]

FORMAT = "emsim-results"
FORMAT_VERSION = 1
PARTIAL_SUFFIX = ".partial"
_STR = h5py.string_dtype(encoding="utf-8")
_EVENT_CHUNK = 512


def partial_path(path) -> Path:
    """The temporary file a run writes beside ``path`` (``<name>.partial``)."""
    path = Path(path)
    return path.with_name(path.name + PARTIAL_SUFFIX)


def _open_in_this_process(path: Path) -> bool:
    """True if this process holds an HDF5 handle on ``path``."""
    try:
        target = os.path.realpath(path)
        for fid in h5py.h5f.get_obj_ids(types=h5py.h5f.OBJ_FILE):
            name = fid.name
            if isinstance(name, bytes):
                name = os.fsdecode(name)
            if os.path.realpath(name) == target:
                return True
    except Exception:  # an id closed between listing and asking; nothing to report
        pass
    return False


def _probe_existing(path: Path, *, is_target: bool) -> None:
    """Raise if an existing file at ``path`` must not be (re)written."""
    if _open_in_this_process(path):
        raise ResultsError(f"results file {str(path)!r} is open in this process; "
                           "close it (Results.close() or the h5py.File) before writing there")
    if not h5py.is_hdf5(str(path)):
        if is_target:
            raise ResultsError(f"{str(path)!r} exists and is not an HDF5 file; expected an emsim results "
                               "file or no file there. Refusing to replace it: choose another path or delete it")
        return  # a stray non-HDF5 partial file is ours to overwrite
    try:
        with h5py.File(path, "r") as f:
            fmt = f.attrs.get("format")
    except OSError as exc:
        what = "results file" if is_target else "partial results file"
        raise ResultsError(f"{what} {str(path)!r} is open for writing elsewhere (or was left by a crashed run): "
                           f"{exc}. Expected it to be closed; if no run is using it, delete it") from exc
    if is_target and fmt != FORMAT:
        raise ResultsError(f"{str(path)!r} is an HDF5 file but not an emsim results file "
                           f"(expected root attribute format={FORMAT!r}). Refusing to replace it: "
                           "choose another path or delete it")


def check_writable(path) -> Path:
    """Check, before any simulating, that results can be written to ``path``.

    Fails if the folder does not exist or is not writable, if ``path`` is a
    directory, or if a file already at ``path`` (or its ``.partial`` file) is
    open elsewhere. It also refuses to replace a file that is not an emsim
    results file. Nothing is left behind: writability is tested with a
    temporary probe file that is removed at once.

    Returns
    -------
    Path
        The absolute target path.

    Raises
    ------
    ResultsError
        With the path and what was expected in the message.
    """
    try:
        path = Path(os.fspath(path)).expanduser()
    except TypeError as exc:
        raise ResultsError(f"results path {path!r} is not a path; expected a str or os.PathLike") from exc
    if str(path) == "" or path.name in ("", ".", ".."):
        raise ResultsError(f"results path {str(path)!r} names no file; expected a file path such as 'run.h5'")
    path = path.absolute()
    folder = path.parent
    if path.is_dir():
        raise ResultsError(f"results path {str(path)!r} is a directory; expected a file path such as "
                           f"{str(path / 'run.h5')!r}")
    if not folder.exists():
        raise ResultsError(f"cannot write results to {str(path)!r}: folder {str(folder)!r} does not exist "
                           "(expected an existing folder)")
    if not folder.is_dir():
        raise ResultsError(f"cannot write results to {str(path)!r}: {str(folder)!r} is not a folder")
    try:
        fd, probe = tempfile.mkstemp(prefix=".emsim-probe-", dir=folder)
    except OSError as exc:
        raise ResultsError(f"cannot write results to {str(path)!r}: folder {str(folder)!r} is not writable "
                           f"({exc.strerror or exc}); expected a folder this process may create files in") from exc
    os.close(fd)
    os.unlink(probe)
    if path.exists():
        _probe_existing(path, is_target=True)
    part = partial_path(path)
    if part.is_dir():
        raise ResultsError(f"cannot write results to {str(path)!r}: {str(part)!r} is a directory; "
                           "expected no directory by that name")
    if part.exists():
        _probe_existing(part, is_target=False)
    return path


def _json_default(obj):
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, (set, frozenset)):
        return sorted(obj)
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"{type(obj).__name__} is not JSON serialisable")


def _check_key(key, what: str, path: Path) -> str:
    if not isinstance(key, str) or key in ("", ".", "..") or "/" in key:
        raise ResultsError(f"{path}: {what} name {key!r} is not allowed; expected a non-empty string "
                           "without '/' (and not '.' or '..')")
    return key


def _package_version() -> str:
    try:
        import emsim  # imported here: emsim/__init__ may itself import this module
        return str(getattr(emsim, "__version__", "unknown"))
    except Exception:
        return "unknown"


class ResultWriter:
    """Append output rows and events of one run to an HDF5 file, live.

    Parameters
    ----------
    path : str or os.PathLike
        Final results file. The run writes ``<path>.partial`` and renames it at
        a successful close (see module docstring).
    names, units : list of str
        Recorded columns and their SI units (``Problem.record_names`` /
        ``Problem.record_units``). Names may contain dots, not slashes.
    metadata : dict
        Run description (system, parameters, solver settings, ...); each key
        becomes ``/meta/<key>``, a JSON string.
    event_kinds : dict of int -> str
        Event kind code -> name.
    component_names : list of str
        Component index -> name, for ``/events/component``.
    event_names : list of str, optional
        A label per event index (e.g. ``Problem.event_owner``).
    flush_every : float
        Wall-time seconds between flushes to disk (0 flushes every batch).
    chunk_rows : int
        Rows per HDF5 chunk of each signal.
    compression : {"gzip", "lzf", None}
    compression_level : int
        gzip level 0-9 (ignored for lzf).

    Time must not decrease, within a batch or from one batch to the next.
    """

    def __init__(self, path, *, names: list[str], units: list[str], metadata: dict,
                 event_kinds: dict[int, str], component_names: list[str],
                 event_names: list[str] | None = None, flush_every: float = 5.0,
                 chunk_rows: int = 1024, compression: str | None = "gzip",
                 compression_level: int = 4):
        self._file = None
        self._closed = True
        target = check_writable(path)
        self.path = target
        self.partial_path = partial_path(target)

        names = list(names)
        units = list(units)
        seen = set()
        for name in names:
            _check_key(name, "signal", target)
            if name in seen:
                raise ResultsError(f"{target}: signal name {name!r} appears twice; expected unique names")
            seen.add(name)
        if len(units) != len(names):
            raise ResultsError(f"{target}: got {len(units)} units for {len(names)} signal names; "
                               "expected one unit per name")
        if not all(isinstance(u, str) for u in units):
            raise ResultsError(f"{target}: units must be strings such as 'ampere' or '' (got {units!r})")
        if isinstance(chunk_rows, bool) or not isinstance(chunk_rows, Integral) or chunk_rows < 1:
            raise ResultsError(f"{target}: chunk_rows={chunk_rows!r}; expected a positive integer")
        if not isinstance(flush_every, Real) or not flush_every >= 0:
            raise ResultsError(f"{target}: flush_every={flush_every!r}; expected seconds >= 0")
        if compression == "gzip":
            if not isinstance(compression_level, Integral) or not 0 <= compression_level <= 9:
                raise ResultsError(f"{target}: gzip compression_level={compression_level!r}; expected 0..9")
            comp = {"compression": "gzip", "compression_opts": int(compression_level), "shuffle": True}
        elif compression == "lzf":
            comp = {"compression": "lzf", "shuffle": True}
        elif compression is None:
            comp = {}
        else:
            raise ResultsError(f"{target}: compression={compression!r}; expected 'gzip', 'lzf' or None")
        kinds = {}
        for code, kname in dict(event_kinds).items():
            if isinstance(code, bool) or not isinstance(code, Integral) or not isinstance(kname, str):
                raise ResultsError(f"{target}: event_kinds must map int codes to str names (got {code!r}: {kname!r})")
            kinds[int(code)] = kname
        component_names = [str(c) for c in component_names]
        event_names = None if event_names is None else [str(e) for e in event_names]
        # encode metadata before creating anything, so a bad value leaves no file
        meta = {}
        for key, value in dict(metadata).items():
            _check_key(key, "metadata", target)
            try:
                meta[key] = json.dumps(value, default=_json_default, allow_nan=True)
            except (TypeError, ValueError) as exc:
                raise ResultsError(f"{target}: metadata[{key!r}] cannot be stored: {exc}; "
                                   "expected JSON-like values (dict, list, str, number, bool, None, numpy arrays)") from exc

        self.names = names
        self.units = units
        self._n_cols = len(names)
        self._kind_codes = np.array(sorted(kinds), dtype=np.int64)
        self._n_components = len(component_names)
        self._flush_every = float(flush_every)
        self._rows = 0
        self._n_events = 0
        self._last_t = -math.inf
        self._summary: dict[str, float] = {}
        self._stats: dict = {}

        try:
            f = h5py.File(self.partial_path, "w", libver="latest")
        except OSError as exc:
            raise ResultsError(f"cannot create {str(self.partial_path)!r}: {exc}") from exc
        self._file = f
        try:
            f.attrs["format"] = FORMAT
            f.attrs["format_version"] = FORMAT_VERSION
            f.attrs["status"] = "running"
            f.attrs["error"] = ""
            f.attrs["emsim_version"] = _package_version()
            f.attrs["created"] = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
            common = dict(shape=(0,), maxshape=(None,), dtype=np.float64, chunks=(int(chunk_rows),), **comp)
            self._time = f.create_dataset("time", **common)
            self._time.attrs["unit"] = "second"
            sig = f.create_group("signals", track_order=True)
            sig.attrs.create("names", data=np.array(names, dtype=object), dtype=_STR)
            self._signals = []
            for name, unit in zip(names, units):
                ds = sig.create_dataset(name, **common)
                ds.attrs["unit"] = unit
                self._signals.append(ds)
            ev = f.create_group("events", track_order=True)
            ev_common = dict(shape=(0,), maxshape=(None,), chunks=(_EVENT_CHUNK,), **comp)
            self._ev_time = ev.create_dataset("time", dtype=np.float64, **ev_common)
            self._ev_time.attrs["unit"] = "second"
            self._ev_component = ev.create_dataset("component", dtype=np.int64, **ev_common)
            self._ev_kind = ev.create_dataset("kind", dtype=np.int64, **ev_common)
            self._ev_index = ev.create_dataset("index", dtype=np.int64, **ev_common)
            ev.attrs.create("component_names", data=np.array(component_names, dtype=object), dtype=_STR)
            ev.attrs.create("kind_codes", data=self._kind_codes)
            ev.attrs.create("kind_names", data=np.array([kinds[c] for c in self._kind_codes], dtype=object),
                            dtype=_STR)
            if event_names is not None:
                ev.attrs.create("event_names", data=np.array(event_names, dtype=object), dtype=_STR)
            mg = f.create_group("meta", track_order=True)
            for key, text in meta.items():
                mg.create_dataset(key, data=text, dtype=_STR)
            f.flush()
            f.swmr_mode = True
        except Exception as exc:
            self._file = None
            try:
                f.close()
            finally:
                _remove_quietly(self.partial_path)
            if isinstance(exc, ResultsError):
                raise
            raise ResultsError(f"cannot set up results file {str(self.partial_path)!r}: {exc}") from exc
        self._closed = False
        self._last_flush = _time.monotonic()

    # ------------------------------------------------------------------ streaming
    def _require_open(self, what: str):
        if self._closed:
            raise ResultsError(f"{self.path}: cannot {what}, the writer is closed")

    @property
    def n_rows(self) -> int:
        """Rows written so far."""
        return self._rows

    @property
    def n_events(self) -> int:
        """Events written so far."""
        return self._n_events

    @property
    def closed(self) -> bool:
        return self._closed

    def rows(self, t, data) -> None:
        """Append a batch of ``k`` output rows.

        Parameters
        ----------
        t : array_like, shape (k,)
            Times, s, not decreasing (and not before the previous batch).
        data : array_like, shape (k, n)
            One column per recorded name, in ``names`` order.
        """
        self._require_open("write rows")
        t = np.asarray(t, dtype=np.float64)
        data = np.asarray(data, dtype=np.float64)
        if t.ndim != 1:
            raise ResultsError(f"{self.path}: rows() got time of shape {t.shape}; expected a 1-D array (k,)")
        k = t.shape[0]
        if data.ndim != 2 or data.shape != (k, self._n_cols):
            raise ResultsError(f"{self.path}: rows() got data of shape {data.shape}; expected ({k}, {self._n_cols}) "
                               f"= ({k} times, {self._n_cols} columns {self._preview_names()})")
        if k == 0:
            return
        if not np.all(np.isfinite(t)):
            raise ResultsError(f"{self.path}: rows() got a non-finite time; expected finite seconds")
        if t[0] < self._last_t or (k > 1 and np.any(np.diff(t) < 0)):
            raise ResultsError(f"{self.path}: rows() time goes backwards (last written {self._last_t!r} s, "
                               f"batch {t[0]!r}..{t[-1]!r} s); expected non-decreasing time")
        n0 = self._rows
        n1 = n0 + k
        cols = np.ascontiguousarray(data.T)
        try:
            # signals first, time last: a reader takes the shortest length as the rows complete
            for j, ds in enumerate(self._signals):
                ds.resize((n1,))
                ds[n0:n1] = cols[j]
            self._time.resize((n1,))
            self._time[n0:n1] = t
        except Exception as exc:
            raise ResultsError(f"{self.path}: writing rows {n0}..{n1} to {str(self.partial_path)!r} failed: {exc}") from exc
        self._rows = n1
        self._last_t = float(t[-1])
        self._maybe_flush()

    def events(self, t, component, kind, index) -> None:
        """Append a batch of events (four 1-D arrays of equal length)."""
        self._require_open("write events")
        t = np.atleast_1d(np.asarray(t, dtype=np.float64))
        arrays = []
        for label, a in (("component", component), ("kind", kind), ("index", index)):
            a = np.atleast_1d(np.asarray(a))
            if a.size and not np.issubdtype(a.dtype, np.integer):
                raise ResultsError(f"{self.path}: events() {label} has dtype {a.dtype}; expected integers")
            arrays.append(a.astype(np.int64, copy=False))
        comp, kd, idx = arrays
        shapes = {"time": t.shape, "component": comp.shape, "kind": kd.shape, "index": idx.shape}
        if any(len(s) != 1 for s in shapes.values()) or len({s[0] for s in shapes.values()}) != 1:
            raise ResultsError(f"{self.path}: events() got shapes {shapes}; expected four 1-D arrays of equal length")
        k = t.shape[0]
        if k == 0:
            return
        if np.any((comp < 0) | (comp >= self._n_components)):
            raise ResultsError(f"{self.path}: events() component index out of range; expected 0..{self._n_components - 1} "
                               f"(got {comp[(comp < 0) | (comp >= self._n_components)][:5].tolist()})")
        unknown = ~np.isin(kd, self._kind_codes)
        if np.any(unknown):
            raise ResultsError(f"{self.path}: events() kind code(s) {np.unique(kd[unknown])[:5].tolist()} not in "
                               f"event_kinds; expected one of {self._kind_codes.tolist()}")
        n0 = self._n_events
        n1 = n0 + k
        try:
            for ds, a in ((self._ev_component, comp), (self._ev_kind, kd), (self._ev_index, idx), (self._ev_time, t)):
                ds.resize((n1,))
                ds[n0:n1] = a
        except Exception as exc:
            raise ResultsError(f"{self.path}: writing events to {str(self.partial_path)!r} failed: {exc}") from exc
        self._n_events = n1
        self._maybe_flush()

    def _preview_names(self) -> str:
        shown = ", ".join(self.names[:4])
        return f"[{shown}{', ...' if len(self.names) > 4 else ''}]"

    def _maybe_flush(self) -> None:
        now = _time.monotonic()
        if now - self._last_flush >= self._flush_every:
            self._file.flush()
            self._last_flush = now

    def flush(self) -> None:
        """Write everything so far to disk now, so live readers see it."""
        self._require_open("flush")
        self._file.flush()
        self._last_flush = _time.monotonic()

    # ------------------------------------------------------------------ summary
    def set_summary(self, summary: dict) -> None:
        """Energy balance of the run, in J (written to ``/energy`` at close).

        Typical keys: ``supplied``, ``stored_change``, ``dissipated``,
        ``delivered``, ``residual``. Later calls update earlier ones.
        """
        self._require_open("set the summary")
        clean = {}
        for key, value in dict(summary).items():
            _check_key(key, "energy", self.path)
            if isinstance(value, bool) or not isinstance(value, (Real, np.floating, np.integer)):
                raise ResultsError(f"{self.path}: energy[{key!r}] = {value!r}; expected a number in joule")
            clean[key] = float(value)
        self._summary.update(clean)

    def set_stats(self, stats: dict) -> None:
        """Solver statistics (written as attributes of ``/solver_stats`` at close).

        Values may be numbers, bools, strings or flat lists of numbers.
        Later calls update earlier ones.
        """
        self._require_open("set the solver statistics")
        clean = {}
        for key, value in dict(stats).items():
            _check_key(key, "statistic", self.path)
            if isinstance(value, (bool, np.bool_)):
                clean[key] = np.bool_(value)
            elif isinstance(value, (Integral, np.integer)):
                clean[key] = np.int64(value)
            elif isinstance(value, (Real, np.floating)):
                clean[key] = np.float64(value)
            elif isinstance(value, str):
                clean[key] = value
            else:
                arr = np.asarray(value)
                if arr.ndim != 1 or not (np.issubdtype(arr.dtype, np.integer) or np.issubdtype(arr.dtype, np.floating)):
                    raise ResultsError(f"{self.path}: solver stat {key!r} = {value!r}; expected a number, bool, "
                                       "string or a flat list of numbers")
                clean[key] = arr
        self._stats.update(clean)

    # ------------------------------------------------------------------ closing
    def close(self, ok: bool = True, error=None) -> None:
        """Finish the file.

        ``ok=True`` marks it complete and renames it onto the target path.
        ``ok=False`` keeps ``<path>.partial`` marked ``status="failed"`` with
        ``error`` (an exception or text) and leaves the target path untouched.
        Closing twice does nothing.
        """
        if self._closed:
            return
        self._closed = True
        f, self._file = self._file, None
        try:
            f.flush()
        except Exception:
            pass
        finally:
            try:
                f.close()
            except Exception:
                pass
        message = ""
        if error is not None:
            message = f"{type(error).__name__}: {error}" if isinstance(error, BaseException) else str(error)
        elif not ok:
            message = "run failed (no message given)"
        try:
            # leave SWMR: the summary groups are new objects, which a SWMR writer may not create
            with h5py.File(self.partial_path, "r+", libver="latest") as g:
                energy = g.create_group("energy", track_order=True)
                energy.attrs["unit"] = "joule"
                for key, value in self._summary.items():
                    ds = energy.create_dataset(key, data=np.float64(value))
                    ds.attrs["unit"] = "joule"
                stats = g.create_group("solver_stats", track_order=True)
                for key, value in self._stats.items():
                    stats.attrs[key] = value
                g.attrs["n_rows"] = np.int64(self._rows)
                g.attrs["n_events"] = np.int64(self._n_events)
                g.attrs["error"] = message
                g.attrs["status"] = "complete" if ok else "failed"
            if ok:
                _fsync(self.partial_path)
                os.replace(self.partial_path, self.path)
                _fsync_dir(self.path.parent)
        except Exception as exc:
            raise ResultsError(f"{self.path}: could not finish results file {str(self.partial_path)!r}: {exc}; "
                               "the partial file is kept") from exc

    def __enter__(self) -> "ResultWriter":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.close(ok=True)
            return
        try:
            self.close(ok=False, error=exc)
        except Exception as close_exc:  # do not hide the run's own error
            warnings.warn(f"results file not finished cleanly: {close_exc}", RuntimeWarning, stacklevel=2)

    def __repr__(self) -> str:
        state = "closed" if self._closed else "open"
        return f"<ResultWriter {str(self.path)!r} {state}, {self._rows} rows x {self._n_cols} columns>"


def _remove_quietly(path: Path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def _fsync(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(folder: Path) -> None:
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
