"""What a sensible-heat method is to the rest of the package, and the registry of methods.

A method turns the surface state of each pixel into sensible heat H, after an image-wide step
that needs the whole scene first (anchors, edges). The scene code runs it in two passes:

1. pass 1, per block: :meth:`SensibleHeatMethod.pass1_block` reduces the block's state to a
   small partial result; :meth:`~SensibleHeatMethod.combine` merges two of them (tree-reduced);
2. once per scene: :meth:`~SensibleHeatMethod.calibrate` turns the reduction into the
   parameters pass 2 needs, and the facts the manifest records;
3. pass 2, per block: :meth:`~SensibleHeatMethod.sensible_heat_block` gives H for every pixel,
   :meth:`~SensibleHeatMethod.qa_block` its QA bits.

Everything else a method shows to users (its line in the run's output, its columns in
``batch.csv``, its picture in the report, its pre-run checks in ``inspect``) is asked of the
method too, so a new method is one module and one :func:`register` call.
"""

from __future__ import annotations

import typing
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any, ClassVar

import numpy as np
from pydantic import BaseModel, ConfigDict, model_validator

from ..errors import RecipeError

__all__ = [
    "METHODS",
    "Calibrated",
    "CalibrationContext",
    "ReportFigure",
    "SensibleHeatMethod",
    "StrictSettings",
    "get_method",
    "register",
]


def _accepts_bool(annotation: Any) -> bool:
    """Whether a field's type admits a bool (bool itself, or a union or annotation holding it)."""
    if annotation is bool:
        return True
    return any(_accepts_bool(a) for a in typing.get_args(annotation))


def refuse_bools(model: type[BaseModel], data: Any) -> Any:
    """Refuse ``true``/``false`` for a key that is not a switch: pydantic would read them as 1
    and 0 (``air_temperature_c = true`` would run at 1 degC)."""
    if isinstance(data, dict):
        for name, value in data.items():
            field = model.model_fields.get(name)
            if (
                isinstance(value, bool)
                and field is not None
                and not _accepts_bool(field.annotation)
            ):
                raise ValueError(f"{name} = {str(value).lower()} is a switch value; give a number")
    return data


class StrictSettings(BaseModel):
    """Base of every settings table: unknown keys and switch values for numbers are refused,
    values are frozen."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    @model_validator(mode="before")
    @classmethod
    def _no_bools_for_numbers(cls, data: Any) -> Any:
        return refuse_bools(cls, data)


@dataclass(frozen=True)
class CalibrationContext:
    """What a method's once-per-scene step may use besides its pass-1 reduction."""

    scene: Any  # the recipe's Scene
    settings: Any  # the method's own settings (``SensibleHeatMethod.settings``)
    grid: Any  # the target grid
    constants: Any  # surface.SceneConstants
    lookups: Any  # surface.ClassLookups
    member_offsets: tuple[tuple[float, float, float], ...]  # members' (air, albedo, Ts) offsets
    gridded_weather: frozenset[str]  # overpass keys given as rasters
    blending_wind_speed: float  # the station's wind at the blending height [m s-1]
    pixel_state: Callable[[int, int], dict]  # the surface state of one pixel (row, col)


@dataclass(frozen=True)
class Calibrated:
    """The outcome of :meth:`SensibleHeatMethod.calibrate`."""

    params: Any  # picklable; what pass 2 needs per block
    facts: dict  # manifest entries, by key
    members: tuple = ()  # ensemble members' parameters, when the method has an ensemble


@dataclass(frozen=True)
class ReportFigure:
    """A method's picture in the report: points marked on the daily-ET map, or a file."""

    title: str
    markers: tuple[tuple[float, float, str, str], ...] = ()  # x, y, label, colour
    image: Path | None = None


class SensibleHeatMethod:
    """Interface of a sensible-heat method; subclasses override what they need."""

    #: the value of ``sensible_heat`` in a recipe
    name: ClassVar[str]
    #: the recipe table of the method's settings, ``[scene.<settings_key>]``, and its model
    settings_key: ClassVar[str | None] = None
    settings_model: ClassVar[type[StrictSettings] | None] = None
    #: recipe keys the method needs, with why: ``(("overpass.wind_speed_m_s", "..."),)``
    needs: ClassVar[tuple[tuple[str, str], ...]] = ()
    #: whether ``[scene.uncertainty]`` members are implemented for the method
    ensemble: ClassVar[bool] = False
    #: pass 1 needs the state of the anchor-candidate classes only (as 1-D arrays)
    pass1_candidates_only: ClassVar[bool] = False
    #: whether its candidates pass the neighbourhood screens (``rasterbudget.screens``): blocks
    #: are then read with a halo
    anchor_screens: ClassVar[bool] = False
    #: extra columns of ``batch.csv``, filled by :meth:`batch_values`
    batch_columns: ClassVar[tuple[str, ...]] = ()

    def settings(self, scene: Any) -> StrictSettings | None:
        """The method's settings of a scene (its recipe table, defaults filled in)."""
        if self.settings_key is None:
            return None
        return scene.method_settings(self.settings_key, self.settings_model)

    def pass1_block(self, state: dict, location: tuple, ctx: Any) -> Any:
        """A block's partial pass-1 result (small); ``ctx`` is the scene's block context."""
        return None

    def combine(self, a: Any, b: Any) -> Any:
        """Two partial pass-1 results as one."""
        return None

    def calibrate(self, reduced: Any, ctx: CalibrationContext) -> Calibrated:
        """The scene-wide step: parameters for pass 2 and facts for the manifest."""
        raise NotImplementedError

    def sensible_heat_block(
        self,
        state: dict,
        params: Any,
        constants: Any,
        inverse_length_out: np.ndarray,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Sensible heat [W m-2] of every pixel of a block (NaN where the state is not valid),
        and where it converged; may write the stability parameter 1/L [m-1] it used."""
        raise NotImplementedError

    def qa_block(self, state: dict, params: Any, location: tuple) -> np.ndarray | None:
        """Extra QA bits of the block (uint16), or None."""
        return None

    def ensemble_block(
        self,
        state: dict,
        params: Any,
        members: tuple,
        constants: Any,
        valid,
        lam,
        length,
    ) -> dict[str, np.ndarray]:
        """Every member's ``et_hourly`` [mm h-1] and ``evaporative_fraction``, each an array
        (members, rows, cols) (methods with ``ensemble``)."""
        raise NotImplementedError

    def extra_outputs(self, reduced: Any, params: Any, out_dir: Path, title: str) -> dict:
        """Files of the method's own, written after pass 2 (name -> path)."""
        return {}

    def summary(self, facts: dict) -> str:
        """One line on the calibration, for the run's output."""
        return self.name

    def batch_values(self, manifest: dict) -> dict:
        """This scene's values of :attr:`batch_columns`."""
        return {}

    def report_figure(self, manifest: dict, folder: Path) -> ReportFigure | None:
        """The method's picture in the report, or None."""
        return None

    def inspect(self, scene: Any, state: dict, factor: int) -> tuple[list[str], list[str]]:
        """Lines for ``inspect`` from a decimated surface state (``factor``: decimation), and
        every problem a run would meet where it can tell already (``inspect`` prints the lines
        first, then fails with all the problems)."""
        return [], []


METHODS: dict[str, SensibleHeatMethod] = {}


def register(method: SensibleHeatMethod) -> SensibleHeatMethod:
    """Make a method available to recipes under ``method.name``."""
    METHODS[method.name] = method
    return method


def get_method(name: str) -> SensibleHeatMethod:
    """The registered method of that name; a RecipeError naming the known ones otherwise."""
    try:
        return METHODS[name]
    except KeyError:
        raise RecipeError(
            f"sensible_heat = {name!r} is not a known method; use one of {sorted(METHODS)}."
        ) from None
