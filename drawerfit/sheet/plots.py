"""Plots for the build sheet: the frequency response and the bias drift.

Matplotlib with the Agg backend (files only; nothing opens a window).  The
functions take arrays the engine computed; they compute nothing themselves
beyond dB and degrees.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from drawerfit.sheet import fmt  # noqa: E402
from optimiser.request import Request  # noqa: E402

__all__ = ["frequency_grid", "plot_response", "plot_drift", "plot_waveform", "plot_pair_drift"]

TARGET = "#c0392b"
EDGE = "#1f4fbf"
NOMINAL = "#333333"


def _finite(x) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) and x > 0 else None


def frequency_grid(request: Request, metrics: dict, points_per_decade: int = 40) -> np.ndarray:
    """Log-spaced frequencies (Hz) that show both band edges and the targets with a margin."""
    lows = [v for v in (_finite(metrics.get("f_low_hz")), _finite(request.f_low_max_hz),
                        request.mid_hz) if v]
    highs = [v for v in (_finite(metrics.get("f_high_hz")), _finite(request.f_high_min_hz),
                         request.mid_hz * 100.0) if v]
    lo = 10 ** math.floor(math.log10(min(lows) / 10.0))
    hi = 10 ** math.ceil(math.log10(max(highs) * 10.0))
    lo, hi = max(lo, 1e-3), min(hi, 1e11)
    n = int(round(math.log10(hi / lo) * points_per_decade)) + 1
    return np.logspace(math.log10(lo), math.log10(hi), n)


def _si_hz(f: float) -> str:
    return fmt.si(f, "Hz")


def plot_response(paths: Sequence[Path], freqs: np.ndarray, h: np.ndarray, request: Request,
                  metrics: dict) -> list[Path]:
    """Bode magnitude and phase of ``h`` = v_load / v_emf (complex, shape (nf,)).

    Marks the band edges (``f_low_hz``, ``f_high_hz`` from ``metrics``), the
    frequency where midband figures are taken, and the request's targets: the
    gain window (target ± tol) and the limits on the band edges.  Writes each
    path in ``paths`` (format from its suffix) and returns them.
    """
    freqs = np.asarray(freqs, float)
    h = np.asarray(h, complex).reshape(-1)
    mag = 20 * np.log10(np.maximum(np.abs(h), 1e-30))
    phase = np.degrees(np.unwrap(np.angle(h)))

    fig = Figure(figsize=(9.0, 4.6), dpi=110)
    ax_m, ax_p = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 2]})
    ax_m.semilogx(freqs, mag, color=NOMINAL, lw=1.6, label="gain (computed)")
    ax_p.semilogx(freqs, phase, color=NOMINAL, lw=1.4)

    g_db = _finite(metrics.get("gain"))
    g_db = 20 * math.log10(g_db) if g_db else None
    if request.gain_db is not None:
        t, tol = request.gain_db, request.gain_tol_db
        ax_m.axhspan(t - tol, t + tol, color=TARGET, alpha=0.12,
                     label=f"target {t:.1f} ± {tol:g} dB")
    if g_db is not None:
        ax_m.axhline(g_db - 3.01, color=EDGE, lw=0.8, ls=":", label="−3 dB from midband")
    for key, name in (("f_low_hz", "f_low"), ("f_high_hz", "f_high")):
        f = _finite(metrics.get(key))
        if f:
            for ax in (ax_m, ax_p):
                ax.axvline(f, color=EDGE, lw=1.1, ls="--")
            ax_m.annotate(f"{name} {_si_hz(f)}", (f, 0.02), xycoords=("data", "axes fraction"),
                          rotation=90, va="bottom", ha="right", fontsize=8, color=EDGE)
    for f, name in ((_finite(request.f_low_max_hz), "f_low ≤"),
                    (_finite(request.f_high_min_hz), "f_high ≥")):
        if f:
            for ax in (ax_m, ax_p):
                ax.axvline(f, color=TARGET, lw=1.1, ls="-.")
            ax_m.annotate(f"{name} {_si_hz(f)}", (f, 0.98), xycoords=("data", "axes fraction"),
                          rotation=90, va="top", ha="left", fontsize=8, color=TARGET)
    ax_m.axvline(request.mid_hz, color="#888888", lw=0.6)
    ax_m.annotate(f"mid {_si_hz(request.mid_hz)}", (request.mid_hz, 0.02),
                  xycoords=("data", "axes fraction"), rotation=90, va="bottom", ha="left",
                  fontsize=8, color="#666666")

    top = np.nanmax(mag) if np.isfinite(mag).any() else 0.0
    floor = top - 40.0
    if request.gain_db is not None:
        top = max(top, request.gain_db + request.gain_tol_db)
    ax_m.set_ylim(floor, top + 6.0)
    ax_m.set_ylabel("gain |v_load / v_source| (dB)")
    ax_p.set_ylabel("phase (°)")
    ax_p.set_xlabel("frequency (Hz)")
    ax_m.set_title("Frequency response (source and load in place)", fontsize=10)
    for ax in (ax_m, ax_p):
        ax.grid(True, which="major", lw=0.4, alpha=0.6)
    ax_m.legend(loc="lower center", fontsize=8, framealpha=0.9)
    fig.subplots_adjust(left=0.09, right=0.985, top=0.93, bottom=0.11, hspace=0.08)
    out = []
    for p in paths:
        p = Path(p)
        fig.savefig(p, format=p.suffix.lstrip("."), metadata=_metadata(p))
        out.append(p)
    return out


def _metadata(p: Path) -> dict:
    # Keep the files reproducible and free of the tool chain's address.
    if p.suffix == ".svg":
        return {"Creator": None, "Date": None}
    if p.suffix == ".png":
        return {"Software": None}
    return {}


def _corner_labels(corners: dict) -> list[str]:
    """hFE as the data sheet gives it (at 25 °C, ``beta25``) and the temperature."""
    beta = np.asarray(corners.get("beta25", corners["beta"]), float).reshape(-1)
    temp = np.asarray(corners["temp_c"], float).reshape(-1)
    return [f"hFE {b:.0f}\n{t:g} °C" for b, t in zip(beta, temp, strict=True)]


def plot_drift(path: Path, metrics: dict, corners: dict | None, request: Request,
               yield_samples: dict | None = None, yield_pct: float | None = None) -> Path:
    """I_C and gain at the drift corners, and the yield histogram when computed.

    ``corners`` holds arrays of one design (shape (4,)): ``beta`` (hFE at the
    corner), ``temp_c``, ``ic_a`` (A), ``gain`` (V/V).  ``yield_samples`` maps
    a metric key (e.g. ``gain_db``) to the per-sample values of the Monte Carlo
    run; the histogram shows ``gain_db`` when present, else the first array.
    """
    panels = 2 + (1 if yield_samples else 0)
    fig = Figure(figsize=(3.3 * panels + (1.2 if panels == 2 else 0), 3.0), dpi=110)
    axes = fig.subplots(1, panels)
    ic0, g0 = _finite(metrics.get("ic_a")), _finite(metrics.get("gain"))
    if corners is not None:
        labels = _corner_labels(corners)
        x = np.arange(len(labels))
        ic = np.asarray(corners["ic_a"], float).reshape(-1)
        gain = np.asarray(corners["gain"], float).reshape(-1)
        axes[0].plot(x, ic * 1e3, "o", color=EDGE, ms=7, label="corner")
        axes[1].plot(x, 20 * np.log10(np.maximum(gain, 1e-30)), "o", color="#2e8b57", ms=7,
                     label="corner")
        for ax in axes[:2]:
            ax.set_xticks(x, labels, fontsize=7)
            ax.set_xlim(-0.6, len(labels) - 0.4)
    else:
        for ax in axes[:2]:
            ax.text(0.5, 0.5, "drift corners\nnot computed", ha="center", va="center",
                    transform=ax.transAxes, fontsize=9, color="#666666")
    if ic0:
        axes[0].axhline(ic0 * 1e3, color=NOMINAL, lw=1.0, ls="--", label="nominal")
        if request.ic_drift_max_pct is not None:
            d = request.ic_drift_max_pct / 100.0
            axes[0].axhspan(ic0 * 1e3 * (1 - d), ic0 * 1e3 * (1 + d), color=TARGET, alpha=0.10,
                            label=f"± {request.ic_drift_max_pct:g} % allowed")
        axes[0].legend(fontsize=7, loc="best")
    if g0:
        axes[1].axhline(20 * math.log10(g0), color=NOMINAL, lw=1.0, ls="--", label="nominal")
        if request.gain_db is not None:
            axes[1].axhspan(request.gain_db - request.gain_tol_db,
                            request.gain_db + request.gain_tol_db, color=TARGET, alpha=0.10,
                            label="target window")
        axes[1].legend(fontsize=7, loc="best")
    axes[0].set_ylabel("I_C (mA)")
    axes[0].set_title("Collector current at the corners", fontsize=9)
    axes[1].set_ylabel("gain (dB)")
    axes[1].set_title("Gain at the corners", fontsize=9)
    if yield_samples:
        _histogram(axes[2], request, yield_samples, yield_pct)
    fig.tight_layout()
    path = Path(path)
    fig.savefig(path, format="png", metadata=_metadata(path))
    return path


def plot_waveform(path: Path, emf: np.ndarray, v_load: np.ndarray, request: Request,
                  gain: float | None = None, thd_pct: float | None = None) -> Path:
    """One period of the load voltage for a sine EMF at the request's input level.

    ``emf`` and ``v_load`` are the engine's samples over one period (V); ``gain`` (V/V,
    midband) draws the undistorted sine for comparison, ``thd_pct`` goes in the title.
    """
    emf = np.asarray(emf, float).reshape(-1)
    v = np.asarray(v_load, float).reshape(-1)
    phase = np.linspace(0.0, 360.0, v.size, endpoint=False)
    fig = Figure(figsize=(9.0, 3.0), dpi=110)
    ax = fig.subplots(1, 1)
    scale, unit = (1e3, "mV") if np.nanmax(np.abs(v)) < 1.0 else (1.0, "V")
    ax.plot(phase, v * scale, color=NOMINAL, lw=1.6, label="load voltage (computed)")
    if gain is not None and math.isfinite(gain):
        sign = 1.0 if np.dot(v, emf) >= 0 else -1.0
        ax.plot(phase, sign * gain * emf * scale, color=EDGE, lw=1.0, ls="--",
                label="midband gain × input (no distortion)")
    title = (f"Output at {fmt.si(request.input_vpk, 'V')} peak input, "
             f"{fmt.si(request.mid_hz, 'Hz')}")
    if thd_pct is not None and math.isfinite(thd_pct):
        title += f": THD {thd_pct:.3g} %"
    ax.set_title(title, fontsize=10)
    ax.set_xlabel("phase of the input (°)")
    ax.set_ylabel(f"v_load ({unit})")
    ax.set_xlim(0, 360)
    ax.set_xticks([0, 90, 180, 270, 360])
    ax.axhline(0.0, color="#888888", lw=0.6)
    ax.grid(True, lw=0.4, alpha=0.6)
    ax.legend(fontsize=8, loc="best", framealpha=0.9)
    fig.tight_layout()
    path = Path(path)
    fig.savefig(path, format="png", metadata=_metadata(path))
    return path


def plot_pair_drift(path: Path, stages: Sequence[str], nominal_ic: Sequence[float],
                    corners: Sequence[dict], request: Request,
                    yield_samples: dict | None = None, yield_pct: float | None = None) -> Path:
    """Each transistor's I_C at the drift corners of a two-transistor circuit, and the
    yield histogram when computed.

    ``corners[k]`` holds transistor ``k``'s arrays over the corners (``ic_a``, ``temp_c``)
    and ``betas`` (a list, per corner, of both transistors' hFE at 25 °C).
    """
    panels = len(stages) + (1 if yield_samples else 0)
    fig = Figure(figsize=(3.6 * panels, 3.1), dpi=110)
    axes = fig.subplots(1, panels)
    for k, stage in enumerate(stages):
        c = corners[k]
        ic = np.asarray(c["ic_a"], float).reshape(-1)
        temp = np.asarray(c["temp_c"], float).reshape(-1)
        labels = [f"hFE {'/'.join(f'{b:.0f}' for b in bs)}\n{t:g} °C"
                  for bs, t in zip(c["betas"], temp, strict=True)]
        x = np.arange(ic.size)
        ax = axes[k]
        ax.plot(x, ic * 1e3, "o", color=EDGE, ms=6, label="corner")
        ic0 = _finite(nominal_ic[k])
        if ic0:
            ax.axhline(ic0 * 1e3, color=NOMINAL, lw=1.0, ls="--", label="nominal")
            if request.ic_drift_max_pct is not None:
                d = request.ic_drift_max_pct / 100.0
                ax.axhspan(ic0 * 1e3 * (1 - d), ic0 * 1e3 * (1 + d), color=TARGET,
                           alpha=0.10, label=f"± {request.ic_drift_max_pct:g} % allowed")
        ax.set_xticks(x, labels, fontsize=6, rotation=90)
        ax.set_xlim(-0.6, ic.size - 0.4)
        ax.set_ylabel("I_C (mA)")
        ax.set_title(f"{stage}: collector current at the corners", fontsize=9)
        ax.legend(fontsize=7, loc="best")
    if yield_samples:
        _histogram(axes[-1], request, yield_samples, yield_pct)
    fig.tight_layout()
    path = Path(path)
    fig.savefig(path, format="png", metadata=_metadata(path))
    return path


def _histogram(ax, request: Request, yield_samples: dict, yield_pct: float | None) -> None:
    """The Monte Carlo samples' gain (dB) with the target window, else the first array."""
    key = "gain_db" if "gain_db" in yield_samples else next(iter(yield_samples))
    vals = np.asarray(yield_samples[key], float)
    vals = vals[np.isfinite(vals)]
    ax.hist(vals, bins=30, color="#b9a0d6")
    if key == "gain_db" and request.gain_db is not None:
        for v in (request.gain_db - request.gain_tol_db, request.gain_db + request.gain_tol_db):
            ax.axvline(v, color=TARGET, lw=1.0, ls="-.")
    title = "Monte Carlo samples"
    if yield_pct is not None:
        title += f": yield {yield_pct:.1f} %"
    ax.set_title(title, fontsize=9)
    ax.set_xlabel(key)
    ax.set_ylabel("samples")
