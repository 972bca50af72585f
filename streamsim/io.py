"""Files of a run folder: openPMD fields, time series, particle snapshots, checkpoints, summary.

Every file is written atomically: into a temporary file in the same folder, flushed and fsynced,
then renamed over the target (rename is atomic on POSIX), so a crash leaves either the old file
or the new one, never half of one. File-system failures become :class:`OutputError` with one
readable line.

Run folder layout::

    deck.toml        the resolved deck (loads back to the same run)
    summary.json     the contract keys (README, "summary.json")
    theory.json      the linear theory for the deck's box modes
    timeseries.h5    energies, momenta, complex E_k, contrast vs time
    openpmd/fields.h5  openPMD 1.1, one groupBased series: meshes E, rho, density_<species>;
                     particle subsample (the folder holds nothing else, so openPMD readers
                     open the folder as it is)
    particles.h5     all positions at the time of maximum contrast and at the end (PIC)
    continuum.h5     the densities at maximum contrast and at the end (method = "vlasov")
    checkpoint.h5    full state for --resume

A continuum run's fields.h5 also holds f(x, u) of each species at the field cadence, as the 2D
mesh records ``f_<species>`` (axes u, x). Folders written before the openPMD subfolder existed
hold fields.h5 at the top; :func:`fields_path` finds either.
"""
from __future__ import annotations

import contextlib
import datetime as _dt
import json
import os
import tempfile
from pathlib import Path

import h5py
import numpy as np

from . import units
from ._version import __version__
from .numbers import finite_or_none
from .rundata import DensityProfile, DensitySnapshots, ParticleSnapshot, PhaseSpace, RunData, \
    TimeSeries

#: the subfolder that holds the run's openPMD series and nothing else
OPENPMD_FOLDER = "openpmd"
FILES = {"deck": "deck.toml", "summary": "summary.json", "theory": "theory.json",
         "series": "timeseries.h5", "fields": f"{OPENPMD_FOLDER}/fields.h5",
         "particles": "particles.h5", "checkpoint": "checkpoint.h5"}
#: where run folders written before the openPMD subfolder kept the openPMD series
LEGACY_FIELDS = "fields.h5"
#: a continuum run's densities at maximum contrast and at the end (in place of particles.h5)
CONTINUUM_FILE = "continuum.h5"


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


_UMASK = _umask()


class OutputError(OSError):
    """A file could not be written or read; ``str()`` is one line for the user."""


# ----------------------------------------------------------------------------------------------
# atomic writes
# ----------------------------------------------------------------------------------------------
def _fsync_dir(folder: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def _describe(ex: OSError, path: Path) -> str:
    reason = ex.strerror or ex.__class__.__name__
    return f"cannot write {path}: {reason}"


@contextlib.contextmanager
def atomic_path(path: str | Path):
    """Yield a temporary path beside ``path``; on success fsync it and rename it over ``path``."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
        os.close(fd)
        os.chmod(tmp, 0o666 & ~_UMASK)  # mkstemp makes 0600; give the usual permissions
    except OSError as ex:
        raise OutputError(_describe(ex, path)) from None
    tmp = Path(tmp)
    try:
        yield tmp
        fd = os.open(tmp, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
        _fsync_dir(path.parent)
    except OSError as ex:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise OutputError(_describe(ex, path)) from None
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


def write_text(path: str | Path, text: str) -> None:
    with atomic_path(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()


def jsonable(obj):
    """Plain JSON data: numpy scalars/arrays to Python, NaN/inf to None, tuples to lists."""
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return finite_or_none(obj)
    if isinstance(obj, Path):
        return str(obj)
    return obj


def csv_cell(v):
    """One CSV cell: None/NaN/inf empty, floats exactly (repr), lists and dicts as JSON."""
    if v is None:
        return ""
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (float, np.floating)):
        f = finite_or_none(v)
        return "" if f is None else repr(f)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, (list, tuple, dict)):
        return json.dumps(jsonable(v))
    return v


def write_csv(path: str | Path, header: list[str], rows) -> Path:
    """A CSV file with one header line, written atomically (cells by :func:`csv_cell`)."""
    import csv
    import io as _sio
    buf = _sio.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for r in rows:
        w.writerow([csv_cell(v) for v in r])
    write_text(path, buf.getvalue())
    return Path(path)


def save_figure(fig, path: str | Path, dpi: int = 110) -> Path:
    """Save a matplotlib figure as PNG atomically (rendered in memory, then
    :func:`atomic_path`), and close it. The one figure writer of the package."""
    import io as _bio

    import matplotlib.pyplot as plt
    buf = _bio.BytesIO()
    fig.set_dpi(dpi)  # laid out at the resolution it is saved at: each text is measured once
    try:
        fig.tight_layout()
    except (ValueError, RuntimeError):  # a layout that cannot be tightened is still drawn
        pass
    fig.savefig(buf, format="png", dpi=dpi)
    plt.close(fig)
    path = Path(path)
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(buf.getvalue())
            fh.flush()
    return path


def write_json(path: str | Path, data: dict) -> None:
    """JSON with NaN/inf written as null (summary.json is read by other languages too)."""
    write_text(path, json.dumps(jsonable(data), indent=2, allow_nan=False) + "\n")


@contextlib.contextmanager
def atomic_h5(path: str | Path):
    """An h5py.File open for writing that appears at ``path`` only when complete."""
    with atomic_path(path) as tmp:
        try:
            with h5py.File(tmp, "w") as f:
                yield f
        except OSError:
            raise
        except (ValueError, RuntimeError) as ex:  # h5py reports some I/O failures this way
            raise OutputError(f"cannot write {path}: {ex}") from None


# ----------------------------------------------------------------------------------------------
# openPMD 1.1 fields file
# ----------------------------------------------------------------------------------------------
def _b(s: str) -> np.bytes_:
    return np.bytes_(s.encode("ascii"))


def _dims(L=0, M=0, T=0, I=0, theta=0, N=0, J=0) -> np.ndarray:
    return np.array([L, M, T, I, theta, N, J], dtype=np.float64)


def _si_scales(density_cm3: float) -> dict:
    """SI value of one normalised unit of each quantity."""
    import scipy.constants as sc
    wp = units.omega_p_rad_s(density_cm3)
    n_si = density_cm3 * 1.0e6
    return {"time": 1.0 / wp, "length": sc.c / wp, "efield": sc.m_e * sc.c * wp / sc.e,
            "rho": sc.e * n_si, "density": n_si, "momentum": sc.m_e * sc.c, "charge": sc.e,
            "mass": sc.m_e}


def write_openpmd(path, deck, snapshots: DensitySnapshots, phase: PhaseSpace,
                  charges: list[float], weights: list[float], steps_fields: list[int],
                  steps_phase: list[int], distributions: dict | None = None) -> None:
    """Meshes (E, rho, density_<species>) at the field cadence and the phase-space subsample at
    its cadence, in one groupBased openPMD 1.1 file (openPMD standard 1.1.0).

    ``distributions`` (continuum runs): {"t", "f": [per species (n_f, momentum_cells, cells)],
    "grids": [MomentumGrid]} at the field times, written as the 2D meshes ``f_<species>``."""
    si = _si_scales(deck.units.density_cm3)
    dx = deck.box.dx
    names = [s.name for s in deck.species]
    iterations = sorted(set(steps_fields) | set(steps_phase))
    fidx = {s: i for i, s in enumerate(steps_fields)}
    pidx = {s: i for i, s in enumerate(steps_phase)}
    with atomic_h5(path) as f:
        f.attrs["openPMD"] = _b("1.1.0")
        f.attrs["openPMDextension"] = np.uint32(0)
        f.attrs["basePath"] = _b("/data/%T/")
        f.attrs["meshesPath"] = _b("meshes/")
        f.attrs["particlesPath"] = _b("particles/")
        f.attrs["iterationEncoding"] = _b("groupBased")
        f.attrs["iterationFormat"] = _b("/data/%T/")
        f.attrs["author"] = _b(os.environ.get("USER", "streamsim user") or "streamsim user")
        f.attrs["software"] = _b("streamsim")
        f.attrs["softwareVersion"] = _b(__version__)
        f.attrs["date"] = _b(_dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M:%S +0000"))
        f.attrs["comment"] = _b(f"deck: {deck.title}; normalised data, unitSI converts to SI")
        for it in iterations:
            g = f.create_group(f"data/{it}")
            g.attrs["time"] = np.float64(it * deck.time.dt)
            g.attrs["dt"] = np.float64(deck.time.dt)
            g.attrs["timeUnitSI"] = np.float64(si["time"])
            meshes = g.create_group("meshes")
            parts = g.create_group("particles")
            if it in fidx:
                i = fidx[it]
                rho = np.tensordot(np.asarray(charges), snapshots.density[i], axes=1)
                records = [("E", snapshots.efield[i], si["efield"], _dims(L=1, M=1, T=-3, I=-1), True),
                           ("rho", rho, si["rho"], _dims(L=-3, T=1, I=1), False)]
                for s, name in enumerate(names):
                    records.append((f"density_{name}", snapshots.density[i, s], si["density"],
                                    _dims(L=-3), False))
                for rname, data, unit_si, dims, vector in records:
                    if vector:
                        rec = meshes.create_group(rname)
                        comp = rec.create_dataset("x", data=np.asarray(data, dtype=np.float64))
                    else:
                        rec = comp = meshes.create_dataset(rname, data=np.asarray(data, dtype=np.float64))
                    rec.attrs["geometry"] = _b("cartesian")
                    rec.attrs["dataOrder"] = _b("C")
                    rec.attrs["axisLabels"] = np.array([b"x"])
                    rec.attrs["gridSpacing"] = np.array([dx], dtype=np.float64)
                    rec.attrs["gridGlobalOffset"] = np.array([0.0], dtype=np.float64)
                    rec.attrs["gridUnitSI"] = np.float64(si["length"])
                    rec.attrs["unitDimension"] = dims
                    rec.attrs["timeOffset"] = np.float64(0.0)
                    comp.attrs["position"] = np.array([0.0], dtype=np.float64)
                    comp.attrs["unitSI"] = np.float64(unit_si)
                if distributions is not None:
                    _write_distributions(meshes, distributions, i, names, dx, si)
            if it in pidx:
                i = pidx[it]
                for s, name in enumerate(names):
                    xs = np.asarray(phase.x[name][i], dtype=np.float64)
                    us = np.asarray(phase.u[name][i], dtype=np.float64)
                    n = xs.size
                    sp = parts.create_group(name)
                    sub_weight = weights[s] * (deck.box.cells * deck.species[s].particles_per_cell) / max(n, 1)

                    def record(rname, dims, macro=0, power=1.0, time_offset=0.0):
                        r = sp.create_group(rname)
                        r.attrs["unitDimension"] = dims
                        r.attrs["timeOffset"] = np.float64(time_offset)
                        r.attrs["macroWeighted"] = np.uint32(macro)
                        r.attrs["weightingPower"] = np.float64(power)
                        return r

                    def constant(group, value, unit_si, comp=None):
                        c = group.create_group(comp) if comp else group
                        c.attrs["value"] = np.float64(value)
                        c.attrs["shape"] = np.array([n], dtype=np.uint64)
                        c.attrs["unitSI"] = np.float64(unit_si)

                    r = record("position", _dims(L=1))
                    r.create_dataset("x", data=xs).attrs["unitSI"] = np.float64(si["length"])
                    constant(record("positionOffset", _dims(L=1)), 0.0, si["length"], "x")
                    r = record("momentum", _dims(L=1, M=1, T=-1), time_offset=-0.5 * deck.time.dt)
                    r.create_dataset("x", data=us).attrs["unitSI"] = np.float64(si["momentum"])
                    # weighting: real particles per macro-particle of the subsample (per unit
                    # transverse area, since the model is 1D)
                    w = sp.create_dataset("weighting", data=np.full(n, sub_weight * si["density"] * si["length"]))
                    w.attrs["unitDimension"] = _dims()
                    w.attrs["timeOffset"] = np.float64(0.0)
                    w.attrs["macroWeighted"] = np.uint32(1)
                    w.attrs["weightingPower"] = np.float64(1.0)
                    w.attrs["unitSI"] = np.float64(1.0)
                    constant(record("charge", _dims(T=1, I=1)), deck.species[s].charge, si["charge"])
                    constant(record("mass", _dims(M=1)), deck.species[s].mass, si["mass"])
                    pp = sp.create_group("particlePatches")
                    for pname, val in (("numParticles", n), ("numParticlesOffset", 0)):
                        d = pp.create_dataset(pname, data=np.array([val], dtype=np.uint64))
                        d.attrs["unitSI"] = np.float64(1.0)
                    for pname, val in (("offset", 0.0), ("extent", deck.box.length)):
                        grp = pp.create_group(pname)
                        grp.attrs["unitDimension"] = _dims(L=1)
                        d = grp.create_dataset("x", data=np.array([val], dtype=np.float64))
                        d.attrs["unitSI"] = np.float64(si["length"])


def _write_distributions(meshes, dist: dict, i: int, names, dx: float, si: dict) -> None:
    """f_s(u, x) of snapshot i as the 2D mesh records ``f_<species>``: C order, axes (u, x),
    cell-average values at the middle of each momentum cell and on the x nodes. f du is a
    number density, so f has the dimension of a density per momentum (unitSI = n_ref / (m_e c)).
    openPMD 1.1 gives one gridUnitSI for all axes: it is the length unit (for x); the u axis is
    in m_e c, whose SI value the extra attribute ``momentumAxisUnitSI`` gives."""
    for s, name in enumerate(names):
        g = dist["grids"][s]
        rec = meshes.create_dataset(f"f_{name}", data=np.asarray(dist["f"][s][i], dtype=np.float64))
        rec.attrs["geometry"] = _b("cartesian")
        rec.attrs["dataOrder"] = _b("C")
        rec.attrs["axisLabels"] = np.array([b"u", b"x"])
        rec.attrs["gridSpacing"] = np.array([g.du, dx], dtype=np.float64)
        rec.attrs["gridGlobalOffset"] = np.array([g.u_min, 0.0], dtype=np.float64)
        rec.attrs["gridUnitSI"] = np.float64(si["length"])
        rec.attrs["momentumAxisUnitSI"] = np.float64(si["momentum"])
        rec.attrs["unitDimension"] = _dims(L=-4, M=-1, T=1)
        rec.attrs["timeOffset"] = np.float64(0.0)
        rec.attrs["position"] = np.array([0.5, 0.0], dtype=np.float64)
        rec.attrs["unitSI"] = np.float64(si["density"] / si["momentum"])


def read_distributions(path, names: list[str]) -> dict | None:
    """{"t", "f": [per species (n_f, momentum_cells, cells)], "u_min": [..], "du": [..],
    "grids": [MomentumGrid]} from the ``f_<species>`` meshes of a fields.h5 (the shape the run's
    own f snapshots have), or None when it has none (a PIC run)."""
    from .vlasov.grid import MomentumGrid
    with h5py.File(path, "r") as f:
        its = sorted(f["data"], key=int)
        t, fs, lo, du = [], {n: [] for n in names}, {}, {}
        for it in its:
            m = f["data"][it]["meshes"]
            if not all(f"f_{n}" in m for n in names):
                continue
            t.append(float(f["data"][it].attrs["time"]))
            for n in names:
                d = m[f"f_{n}"]
                fs[n].append(d[()])
                lo[n] = float(d.attrs["gridGlobalOffset"][0])
                du[n] = float(d.attrs["gridSpacing"][0])
    if not t:
        return None
    f = [np.array(fs[n]) for n in names]
    grids = [MomentumGrid(u_min=lo[n], u_max=lo[n] + du[n] * fn.shape[1], cells=int(fn.shape[1]),
                          automatic=False) for n, fn in zip(names, f)]
    return {"t": np.array(t), "f": f, "u_min": [lo[n] for n in names],
            "du": [du[n] for n in names], "grids": grids}


def write_profiles(path, profiles: dict[str, DensityProfile | None]) -> None:
    """Density profiles by label ("peak", "end"): group <label> with attribute t and dataset
    density (S, cells)."""
    with atomic_h5(path) as f:
        for label, prof in profiles.items():
            if prof is None:
                continue
            g = f.create_group(label)
            g.attrs["t"] = prof.t
            g.create_dataset("density", data=prof.density)


def read_profiles(path) -> dict[str, DensityProfile | None]:
    out = {"peak": None, "end": None}
    if not Path(path).exists():
        return out
    with h5py.File(path, "r") as f:
        for label in f:
            out[label] = DensityProfile(t=float(f[label].attrs["t"]),
                                        density=f[label]["density"][()])
    return out


# ----------------------------------------------------------------------------------------------
# time series, particle snapshots
# ----------------------------------------------------------------------------------------------
def write_series(path, names: list[str], series: TimeSeries, meta: dict) -> None:
    """Every array of ``series`` as a dataset of the same name, on the common axis ``t``."""
    with atomic_h5(path) as f:
        f.attrs["species"] = np.array([n.encode() for n in names])
        f.attrs["units"] = _b("normalised: t in 1/omega_p, energies in n_ref m_e c^2 c/omega_p, "
                              "momenta in n_ref m_e c c/omega_p, E_k in m_e c omega_p / e")
        for k, v in meta.items():
            f.attrs[k] = v
        for k, v in series.arrays.items():
            f.create_dataset(k, data=v)


def read_series(path) -> tuple[list[str], TimeSeries]:
    with h5py.File(path, "r") as f:
        names = [n.decode() for n in f.attrs["species"]]
        return names, TimeSeries(**{k: f[k][()] for k in f if isinstance(f[k], h5py.Dataset)})


def write_particles(path, snaps: dict[str, ParticleSnapshot | None]) -> None:
    with atomic_h5(path) as f:
        for label, snap in snaps.items():
            if snap is None:
                continue
            g = f.create_group(label)
            g.attrs["t"] = snap.t
            for name, x in snap.x.items():
                d = g.create_dataset(name, data=x)
                d.attrs["weight"] = snap.weight[name]


def read_particles(path) -> dict[str, ParticleSnapshot | None]:
    out = {"peak": None, "end": None}
    if not Path(path).exists():
        return out
    with h5py.File(path, "r") as f:
        for label in f:
            g = f[label]
            out[label] = ParticleSnapshot(t=float(g.attrs["t"]), x={n: g[n][()] for n in g},
                                          weight={n: float(g[n].attrs["weight"]) for n in g})
    return out


def read_openpmd_meshes(path, names: list[str]) -> tuple[DensitySnapshots, PhaseSpace]:
    with h5py.File(path, "r") as f:
        its = sorted(f["data"], key=int)
        st, dens, ef, pt = [], [], [], []
        px = {n: [] for n in names}
        pu = {n: [] for n in names}
        for it in its:
            g = f["data"][it]
            t = float(g.attrs["time"])
            m = g["meshes"]
            if "E" in m:
                st.append(t)
                ef.append(m["E"]["x"][()])
                dens.append(np.stack([m[f"density_{n}"][()] for n in names]))
            p = g["particles"]
            if len(p):
                pt.append(t)
                for n in names:
                    px[n].append(p[n]["position"]["x"][()])
                    pu[n].append(p[n]["momentum"]["x"][()])
    snaps = DensitySnapshots(t=np.array(st), density=np.array(dens), efield=np.array(ef))
    phase = PhaseSpace(t=np.array(pt), x={n: np.array(v) for n, v in px.items()},
                       u={n: np.array(v) for n, v in pu.items()})
    return snaps, phase


# ----------------------------------------------------------------------------------------------
# checkpoints
# ----------------------------------------------------------------------------------------------
def write_checkpoint(path, state: dict, handlers: dict[str, dict], meta: dict) -> None:
    """Full state at a step boundary: positions x^n, momenta u^{n-1/2}, the grid densities n^n
    (kept, not re-deposited, so that a resume is bit-identical whatever the deposit's summation
    order), each handler's arrays under ``handlers/<name>/`` and the JSON ``meta``."""
    with atomic_h5(path) as f:
        f.attrs["step"] = int(state["step"])
        f.attrs["meta"] = json.dumps(jsonable(meta))
        f.create_dataset("density", data=state["density"])
        for i, (x, u) in enumerate(zip(state["x"], state["u"])):
            f.create_dataset(f"x/{i}", data=x)
            f.create_dataset(f"u/{i}", data=u)
        g = f.create_group("handlers")
        for name, arrays in handlers.items():
            hg = g.create_group(name)
            for k, v in arrays.items():
                hg.create_dataset(k, data=v)


def read_checkpoint(path) -> dict:
    """{"step", "x", "u", "density", "meta", "handlers": {name: {key: array}}}."""
    try:
        with h5py.File(path, "r") as f:
            S = len(f["x"])
            out = {"step": int(f.attrs["step"]), "meta": json.loads(f.attrs["meta"]),
                   "x": [f[f"x/{i}"][()] for i in range(S)],
                   "u": [f[f"u/{i}"][()] for i in range(S)],
                   "density": f["density"][()], "handlers": {}}
            for name, hg in f["handlers"].items():
                arrays = {}
                hg.visititems(lambda k, v: arrays.__setitem__(k, v[()])
                              if isinstance(v, h5py.Dataset) else None)
                out["handlers"][name] = arrays
    except (OSError, KeyError, ValueError) as ex:
        raise OutputError(f"cannot read checkpoint {path}: {ex}") from None
    return out


def read_checkpoint_meta(path) -> dict:
    """{"step", "meta"} of a checkpoint, without reading its arrays (what a resume checks first)."""
    try:
        with h5py.File(path, "r") as f:
            return {"step": int(f.attrs["step"]), "meta": json.loads(f.attrs["meta"])}
    except (OSError, KeyError, ValueError) as ex:
        raise OutputError(f"cannot read checkpoint {path}: {ex}") from None


# ----------------------------------------------------------------------------------------------
# a whole run folder
# ----------------------------------------------------------------------------------------------
def is_run_folder(folder) -> bool:
    folder = Path(folder)
    return (folder / FILES["deck"]).is_file() and (folder / FILES["series"]).is_file()


def fields_path(folder) -> Path:
    """The openPMD series of a run folder: ``openpmd/fields.h5``, or ``fields.h5`` at the top of
    a folder written before the subfolder existed (the new place when neither exists)."""
    folder = Path(folder)
    new, old = folder / FILES["fields"], folder / LEGACY_FIELDS
    return old if old.is_file() and not new.is_file() else new


def drop_legacy_fields(folder) -> None:
    """Remove a top-level fields.h5 once the series is written to the openPMD subfolder (a run
    resumed in an old folder), so the folder holds one series and readers find the new one."""
    folder = Path(folder)
    if (folder / FILES["fields"]).is_file():
        with contextlib.suppress(FileNotFoundError):
            (folder / LEGACY_FIELDS).unlink()


def read_run(folder) -> RunData:
    """A run folder back into the RunData a run keeps in memory: the deck through the deck
    module, the theory as a Dispersion, the series, meshes and particle snapshots."""
    from .deck import load_deck
    from .theory import Dispersion
    folder = Path(folder)
    if not is_run_folder(folder):
        raise OutputError(f"{folder} is not a streamsim run folder (no {FILES['deck']} and "
                          f"{FILES['series']})")
    deck = load_deck(folder / FILES["deck"])
    names, series = read_series(folder / FILES["series"])
    cells = deck.box.cells
    fields = fields_path(folder)
    if fields.exists():
        snaps, phase = read_openpmd_meshes(fields, names)
    else:
        snaps = DensitySnapshots(np.zeros(0), np.zeros((0, len(names), cells)),
                                 np.zeros((0, cells)))
        phase = PhaseSpace(np.zeros(0), {}, {})
    parts = read_particles(folder / FILES["particles"])
    theory = None
    if (folder / FILES["theory"]).exists():
        raw = json.loads((folder / FILES["theory"]).read_text(encoding="utf-8"))
        if isinstance(raw, dict) and "error" not in raw:
            theory = Dispersion.from_dict(raw)
    profiles = read_profiles(folder / CONTINUUM_FILE)
    extra = {}
    if deck.method == "vlasov" and fields.exists():
        dist = read_distributions(fields, names)
        if dist is not None:
            extra["distribution"] = dist
    return RunData(deck=deck, names=names, length=deck.box.length, cells=cells,
                   dt=deck.time.dt, series=series, snapshots=snaps, phase_space=phase,
                   peak=parts["peak"], end=parts["end"], theory=theory,
                   peak_density=profiles["peak"], end_density=profiles["end"], extra=extra)


def update_summary(folder, entries: dict) -> None:
    """Merge ``entries`` into an existing summary.json (one atomic rewrite); no file, no-op."""
    path = Path(folder) / FILES["summary"]
    if not path.is_file():
        return
    try:
        current = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return
    if isinstance(current, dict):
        current.update(entries)
        _rename_old_keys(current)
        write_json(path, current)


def _rename_old_keys(summary: dict) -> None:
    """A summary.json of an earlier schema gets the current names of the run's own keys (the
    analysis blocks' entries are recomputed with them) and the current ``schema_version``."""
    from ._version import RENAMED_RUN_SUMMARY_KEYS, SUMMARY_SCHEMA_VERSION
    for (block, old), (_, new) in RENAMED_RUN_SUMMARY_KEYS.items():
        entry = summary.get(block)
        if isinstance(entry, dict) and old in entry:
            entry.setdefault(new, entry.pop(old))
    summary["schema_version"] = SUMMARY_SCHEMA_VERSION
