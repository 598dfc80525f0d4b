"""Read an emsim results file, finished or still being written.

The file is opened read-only in SWMR mode when its format allows, so a run's
``<name>.partial`` file can be followed live: call :meth:`Results.refresh` to
see rows flushed since opening. All columns are cut to the same number of
complete rows, so ``time`` and every signal always line up.

See :mod:`emsim.results.writer` for the file layout.
"""
from __future__ import annotations

import difflib
import json
import os
from pathlib import Path

import h5py
import numpy as np

from ..errors import ResultsError
from ..units import ureg
from .writer import FORMAT, partial_path

__all__ = ["Results", "open_results"]


def _text(value) -> str:
    if isinstance(value, bytes):
        return value.decode("utf-8")
    return str(value)


def _plain(value):
    """Attribute value -> plain Python (numbers, str, lists)."""
    if isinstance(value, bytes):
        return value.decode("utf-8")
    if isinstance(value, np.ndarray):
        if value.dtype.kind in "OSU":
            return [_text(v) for v in value.tolist()]
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    return value


class Results:
    """Read-only view of one results file.

    Parameters
    ----------
    path : str or os.PathLike
        A results file, or a ``.partial`` file of a run still going or failed.

    Attributes
    ----------
    path : Path
    names : list of str
        Recorded columns, in the order the run wrote them.
    """

    def __init__(self, path):
        self.path = Path(os.fspath(path))
        if not self.path.exists():
            hint = ""
            part = partial_path(self.path)
            if part.exists():
                hint = f"; a partial file {str(part)!r} exists (run still going, or failed): open that to inspect it"
            raise ResultsError(f"no results file at {str(self.path)!r}{hint}")
        if self.path.is_dir():
            raise ResultsError(f"results path {str(self.path)!r} is a directory; expected an emsim results file")
        if not h5py.is_hdf5(str(self.path)):
            raise ResultsError(f"{str(self.path)!r} is not an HDF5 file; expected an emsim results file")
        try:
            try:
                f = h5py.File(self.path, "r", libver="latest", swmr=True)
            except OSError:
                f = h5py.File(self.path, "r")  # written without the SWMR format: read it plainly
        except OSError as exc:
            raise ResultsError(f"cannot open results file {str(self.path)!r}: {exc}") from exc
        self._file = f
        try:
            if _text(f.attrs.get("format", "")) != FORMAT:
                raise ResultsError(f"{str(self.path)!r} is not an emsim results file "
                                   f"(expected root attribute format={FORMAT!r})")
            for needed in ("time", "signals", "events"):
                if needed not in f:
                    raise ResultsError(f"results file {str(self.path)!r} has no '/{needed}'; expected the emsim layout")
            self._time = f["time"]
            sig = f["signals"]
            self.names = _plain(sig.attrs["names"]) if "names" in sig.attrs else list(sig.keys())
            self._signals = {name: sig[name] for name in self.names}
            self._units = {name: _text(self._signals[name].attrs.get("unit", "")) for name in self.names}
            ev = f["events"]
            self._ev = {k: ev[k] for k in ("time", "component", "kind", "index")}
            self.component_names = _plain(ev.attrs.get("component_names", np.array([], dtype=object)))
            codes = _plain(ev.attrs.get("kind_codes", np.array([], dtype=np.int64)))
            knames = _plain(ev.attrs.get("kind_names", np.array([], dtype=object)))
            self.event_kinds = dict(zip(codes, knames))
            self.event_names = _plain(ev.attrs["event_names"]) if "event_names" in ev.attrs else None
        except ResultsError:
            f.close()
            raise
        except Exception as exc:
            f.close()
            raise ResultsError(f"results file {str(self.path)!r} is damaged or not in the emsim layout: {exc}") from exc
        self._n = 0
        self._n_ev = 0
        self.refresh()

    # ------------------------------------------------------------------ live
    def refresh(self) -> int:
        """Pick up rows and events flushed since the last look; returns the row count."""
        self._check_open()
        live = self._file.swmr_mode
        datasets = [self._time, *self._signals.values()]
        if live:
            for ds in (*datasets, *self._ev.values()):
                ds.refresh()
        self._n = min(ds.shape[0] for ds in datasets)
        self._n_ev = min(ds.shape[0] for ds in self._ev.values())
        return self._n

    def _check_open(self):
        if not self._file:
            raise ResultsError(f"results file {str(self.path)!r} is closed")

    # ------------------------------------------------------------------ signals
    def __len__(self) -> int:
        return self._n

    def __contains__(self, name) -> bool:
        return name in self._signals

    @property
    def time(self) -> np.ndarray:
        """Output times, s."""
        self._check_open()
        return self._time[: self._n]

    def _dataset(self, name):
        try:
            return self._signals[name]
        except (KeyError, TypeError):
            pass
        if name == "time":
            return self._time
        close = difflib.get_close_matches(str(name), self.names, n=5, cutoff=0.5)
        hint = f"; close matches: {', '.join(close)}" if close else f"; {len(self.names)} signals are recorded"
        raise KeyError(f"no signal {name!r} in {str(self.path)!r}{hint}")

    def __getitem__(self, name: str) -> np.ndarray:
        """Values of one signal (in its SI unit), as a float64 array."""
        ds = self._dataset(name)
        self._check_open()
        return ds[: self._n]

    def unit(self, name: str) -> str:
        """SI unit of a signal as stored ("" for none)."""
        if name == "time" and name not in self._signals:
            return "second"
        self._dataset(name)
        return self._units[name]

    def get(self, name: str, quantity: bool = True):
        """One signal, as a pint Quantity in :data:`emsim.units.ureg` (or a bare array)."""
        values = self[name]
        if not quantity:
            return values
        unit = self.unit(name)
        return ureg.Quantity(values, ureg.dimensionless if unit in ("", "1") else ureg.parse_units(unit))

    # ------------------------------------------------------------------ events
    @property
    def events(self) -> np.ndarray:
        """All events as a structured array.

        Fields: ``time`` (s), ``component`` (index), ``component_name``,
        ``kind`` (code), ``kind_name``, ``index``.
        """
        self._check_open()
        n = self._n_ev
        t = self._ev["time"][:n]
        comp = self._ev["component"][:n]
        kind = self._ev["kind"][:n]
        index = self._ev["index"][:n]
        comp_names = np.array(self.component_names + [""], dtype=str)
        kind_lookup = [self.event_kinds.get(int(k), "") for k in kind]
        cw = max(1, max((len(c) for c in self.component_names), default=1))
        kw = max(1, max((len(k) for k in self.event_kinds.values()), default=1))
        out = np.empty(n, dtype=[("time", "f8"), ("component", "i8"), ("component_name", f"U{cw}"),
                                 ("kind", "i8"), ("kind_name", f"U{kw}"), ("index", "i8")])
        out["time"] = t
        out["component"] = comp
        safe = np.where((comp >= 0) & (comp < len(self.component_names)), comp, len(self.component_names))
        out["component_name"] = comp_names[safe] if n else []
        out["kind"] = kind
        out["kind_name"] = kind_lookup
        out["index"] = index
        return out

    # ------------------------------------------------------------------ description
    @property
    def status(self) -> str:
        """``"running"``, ``"complete"`` or ``"failed"``."""
        self._check_open()
        return _text(self._file.attrs.get("status", "unknown"))

    @property
    def error(self) -> str | None:
        """Error message of a failed run, else None."""
        self._check_open()
        msg = _text(self._file.attrs.get("error", ""))
        return msg or None

    @property
    def metadata(self) -> dict:
        """The run description the writer was given, decoded from JSON."""
        self._check_open()
        out = {}
        meta = self._file.get("meta")
        if meta is None:
            return out
        for key, ds in meta.items():
            text = _text(ds[()])
            try:
                out[key] = json.loads(text)
            except ValueError as exc:
                raise ResultsError(f"results file {str(self.path)!r}: /meta/{key} is not valid JSON ({exc})") from exc
        return out

    @property
    def energy(self) -> dict:
        """Energy balance in J (empty while the run goes)."""
        self._check_open()
        group = self._file.get("energy")
        if group is None:
            return {}
        return {key: float(ds[()]) for key, ds in group.items()}

    @property
    def stats(self) -> dict:
        """Solver statistics (empty while the run goes)."""
        self._check_open()
        group = self._file.get("solver_stats")
        if group is None:
            return {}
        return {key: _plain(value) for key, value in group.attrs.items()}

    # ------------------------------------------------------------------ lifetime
    def close(self) -> None:
        if self._file:
            self._file.close()

    def __enter__(self) -> "Results":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        if not self._file:
            return f"<Results {str(self.path)!r} closed>"
        return (f"<Results {str(self.path)!r} {self.status}: {self._n} rows x {len(self.names)} signals, "
                f"{self._n_ev} events>")


def open_results(path) -> Results:
    """Open a results file for reading (same as ``Results(path)``)."""
    return Results(path)
