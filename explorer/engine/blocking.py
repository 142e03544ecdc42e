"""Relative efficiency of blocking: how much a block design gained over no blocks.

The residual mean square a completely randomized design would have had on the same
units is estimated from the block and residual mean squares of the blocked analysis,
the treatments contributing only error (Montgomery, Design and Analysis of
Experiments, ch. 4, "relative efficiency of the RCBD"; Cochran and Cox 1957, sec. 4.37):

    sigma2_crd = (df_blk MS_blk + (df_trt + df_E) MS_E) / (df_blk + df_trt + df_E)

and the relative efficiency, with Fisher's correction for the error df of the two
designs (df_b = df_E of the block design, df_r = df_E + df_blk of the unblocked one):

    R = (df_b + 1)(df_r + 3) / ((df_b + 3)(df_r + 1)) * sigma2_crd / MS_E

R = 1.6 means an unblocked experiment would have needed about 1.6 times as many runs
for the same precision.

References
----------
Montgomery, D. C. Design and Analysis of Experiments, ch. 4.
Cochran, W. G. and Cox, G. M. (1957). Experimental Designs, 2nd ed., Wiley.
Fisher, R. A. (1935). The Design of Experiments, sec. 74 (df correction).
"""

from __future__ import annotations

from dataclasses import dataclass

from ..formatting import show_share, show_ss
from ..rendering import footnote, html_repr
from .tables import esc

__all__ = ["BlockingEfficiency", "blocking_efficiency"]


@dataclass(frozen=True, kw_only=True)
class BlockingEfficiency:
    """Relative efficiency of the block design against a completely randomized one."""

    relative_efficiency: float | None
    variance_ratio: float | None
    ms_resid_blocked: float
    ms_resid_unblocked: float
    df_resid_blocked: int
    df_resid_unblocked: int
    notes: tuple[str, ...] = ()

    @html_repr
    def _repr_html_(self) -> str:
        text = (
            f"Relative efficiency of blocking: {show_share(self.relative_efficiency)} (residual mean square "
            f"{show_ss(self.ms_resid_blocked)} with blocks against an estimated {show_ss(self.ms_resid_unblocked)} without)"
        )
        return f"<div>{esc(text)}</div>" + "".join(footnote(n) for n in self.notes)


def blocking_efficiency(
    ss_blocks: float, df_blocks: int, ss_resid: float, df_resid: int, df_treatments: int
) -> BlockingEfficiency:
    """Relative efficiency of blocking (Montgomery, ch. 4; see the module docstring)."""
    ms_e = ss_resid / df_resid
    ms_b = ss_blocks / df_blocks
    sigma2_crd = (df_blocks * ms_b + (df_treatments + df_resid) * ms_e) / (df_blocks + df_treatments + df_resid)
    df_b, df_r = df_resid, df_resid + df_blocks
    notes: tuple[str, ...] = ()
    if ms_e > 0:
        ratio = sigma2_crd / ms_e
        correction = (df_b + 1) * (df_r + 3) / ((df_b + 3) * (df_r + 1))
        re: float | None = correction * ratio
        vr: float | None = ratio
    else:
        re = vr = None
        notes = ("The relative efficiency is undefined: the residual mean square is zero.",)
    return BlockingEfficiency(
        relative_efficiency=re,
        variance_ratio=vr,
        ms_resid_blocked=ms_e,
        ms_resid_unblocked=sigma2_crd,
        df_resid_blocked=df_b,
        df_resid_unblocked=df_r,
        notes=notes,
    )
