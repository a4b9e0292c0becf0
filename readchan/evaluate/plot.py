"""The sweep plot: success rate and character error rate against the swept value, as a PNG.

Input: a :class:`readchan.evaluate.sweep.SweepResult` and a target path.  Output: the PNG,
written through :func:`readchan.io.atomic.atomic_output` (an existing file only with ``force``).
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from readchan.errors import ParameterError
from readchan.evaluate.trial import SUCCESS_TARGET
from readchan.io.atomic import atomic_output, check_output_path

if TYPE_CHECKING:
    from readchan.evaluate.sweep import SweepResult


def plot_sweep(result: SweepResult, path: str | os.PathLike, *, force: bool = False) -> Path:
    """Draw success rate and character error rate against the swept value as a PNG.

    The 99 % success line and the first failing step are marked.  Refuses to replace an
    existing file unless ``force``; writes through a temporary file in the same folder.
    """
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    path = Path(path)
    check_plot_path(path, force=force)
    x = np.array([s.value for s in result.steps])
    success = np.array([100 * s.success_rate for s in result.steps])
    cer = np.array([100 * s.char_error_rate for s in result.steps])
    spec = result.spec
    fig, ax = plt.subplots(figsize=(7.5, 4.5), dpi=120)
    ax.plot(x, success, "o-", color="tab:blue", label="read success")
    ax.plot(x, cer, "s--", color="tab:red", label="character error rate")
    ax.axhline(100 * SUCCESS_TARGET, color="tab:blue", ls=":", lw=1, label="99 % success")
    ax.set_ylim(-3, 103)
    ax.set_xlabel(f"{spec.parameter} ({spec.unit})")
    ax.set_ylabel("percent of trials / of characters")
    if x.size > 1 and x[0] > x[-1]:
        ax.invert_xaxis()   # read the curve in sweep order
    i = result.first_failing_step
    if i is not None:
        ax.axvline(x[i], color="k", ls="--", lw=1, label="first step below 99 %")
        lo, hi = ax.get_xlim()
        right_half = hi != lo and (x[i] - lo) / (hi - lo) > 0.5
        ax.annotate(f"{spec.parameter} = {x[i]:g}", (x[i], 50),
                    xytext=(-6 if right_half else 6, 0), textcoords="offset points", fontsize=8,
                    ha="right" if right_half else "left",
                    bbox={"boxstyle": "round", "fc": "white", "ec": "0.7"})
    b = spec.base
    ax.set_title(f"track {b.track}, {b.speed_cm_s:g} cm/s {b.profile}, {spec.trials} trials/step, "
                 f"{result.rate_hz / 1000:g} kHz", fontsize=9)
    ax.legend(loc="best", fontsize=8)
    ax.grid(alpha=0.3)
    fig.tight_layout()
    try:
        with atomic_output(path, force=force) as tmp:
            fig.savefig(tmp, format="png")
    finally:
        plt.close(fig)
    return path


def check_plot_path(path: Path, *, force: bool = False) -> None:
    """Raise a ReadchanError (exit code 2) unless ``path`` can take a new PNG: the rules of
    :func:`readchan.io.atomic.check_output_path`, and the directory takes a file now."""
    if Path(path).suffix.lower() != ".png":
        raise ParameterError(f"the plot is written as PNG; give a file name ending in .png, was {str(path)!r}")
    check_output_path(path, force=force, probe=True)
