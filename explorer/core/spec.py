"""What to fit: the response, the factors and how they enter the model."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

from .errors import ExplorerError

__all__ = ["ModelSpec"]

SSType = Literal["I", "II", "III"]


@dataclass(frozen=True, kw_only=True)
class ModelSpec:
    """Response, treatment factors, additive block factors, interactions and SS type.

    ``interactions=True`` crosses all treatment factors (full factorial); blocks always
    enter additively (no block-by-treatment term), as in a randomized complete block
    design. ``alpha`` is the level at which decisions are read.
    """

    response: str
    factors: tuple[str, ...]
    blocks: tuple[str, ...] = field(default=())
    interactions: bool = True
    ss_type: SSType = "II"
    alpha: float = 0.05

    def __post_init__(self) -> None:
        if isinstance(self.factors, str):
            object.__setattr__(self, "factors", (self.factors,))
        if isinstance(self.blocks, str):
            object.__setattr__(self, "blocks", (self.blocks,))
        object.__setattr__(self, "factors", tuple(self.factors))
        object.__setattr__(self, "blocks", tuple(self.blocks))
        ss = str(self.ss_type).upper()
        ss = {"1": "I", "2": "II", "3": "III"}.get(ss, ss)
        if ss not in ("I", "II", "III"):
            raise ExplorerError(f"ss_type must be 'I', 'II' or 'III' (or 1, 2, 3), not {self.ss_type!r}")
        object.__setattr__(self, "ss_type", ss)
        if not 0 < float(self.alpha) < 1:
            raise ExplorerError(f"alpha must be between 0 and 1, not {self.alpha!r}")

    @property
    def columns(self) -> tuple[str, ...]:
        """Every grouping column: treatment factors then blocks."""
        return self.factors + self.blocks

    @property
    def is_oneway(self) -> bool:
        return len(self.factors) == 1 and not self.blocks

    def to_dict(self) -> dict[str, Any]:
        return {
            "response": self.response,
            "factors": list(self.factors),
            "blocks": list(self.blocks),
            "interactions": self.interactions,
            "ss_type": self.ss_type,
            "alpha": self.alpha,
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "ModelSpec":
        return cls(
            response=d["response"],
            factors=tuple(d["factors"]),
            blocks=tuple(d.get("blocks", ())),
            interactions=bool(d.get("interactions", True)),
            ss_type=d.get("ss_type", "II"),
            alpha=float(d.get("alpha", 0.05)),
        )
