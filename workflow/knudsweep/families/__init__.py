"""Registry of solver families: how a study section becomes points, files, tables, figures.

A *family* is one kind of problem with its own solver and its own grid of
parameters (the plane channel; later a tube/duct family and a homogeneous
relaxation family).  The core (config loading, Snakemake rules, the solve job,
gather, tables, figures, status, CLI) never names a family: it asks this
registry.  Every family has the same shape, a subpackage
``knudsweep/families/<name>/``:

``__init__.py``
    the :class:`Family` subclass and its instance ``FAMILY`` (solve dispatch,
    numba warm-up, wiring of the two modules below);
``grid.py``
    the study section: its checks, the point values, identity (paths), gather
    dimensions, cost and memory of a point;
``report.py``
    tables, figures and figure captions, each builder registered by name in
    the module's ``TABLES`` and ``FIGURES`` (:class:`Products`), so the names
    Snakemake plans and the products written cannot disagree.

Adding a family takes three steps and no change to the core:

1. write that subpackage (copy ``families/tube_duct/``) and add
   ``knudsweep.families.<name>`` to ``packages`` in pyproject.toml;
2. add one line to :data:`REGISTRY` below (``"<name>": "knudsweep.families.<name>"``);
3. describe its study section under the top-level key ``<name>`` in
   ``config/schema.yaml`` (description/unit/range/default on every key,
   ``additionalProperties: false``); tests/unit/test_config.py checks that every
   registered family has a schema section.

Words used the same way throughout the study layer: a *family* is a study
section (``plane_channel``, ``tube_duct``, ``relaxation``; the solvers'
``SolverResult.family`` names the solver instead: ``tube`` or ``duct``); a
*geometry* is one cross-section of the tube_duct family (``tube``,
``duct-A=4.0``: its *shape* and aspect ratio); a *model* is a kinetic model
(knudsweep.solver.kinetic_models); a *wall* is one wall setting (its label),
its *wall law* the accommodation parameters.

The protocol (what the core calls; ``section`` is the family's validated study
section with defaults filled in, ``study`` the whole validated study):

``name``
    Section key, first path segment under ``results/points/`` and the netCDF
    group name in ``results/<study>/sweep.nc``.
``check_section(section)``
    Checks the schema cannot express; raise ``ValueError("<key>: ... allowed ...")``
    (the caller prefixes the family name, so the message names the key path).
``points(section) -> list[Point]``
    Expand the grid.  Each :class:`Point` carries canonical ``values`` (JSON
    scalars only; build floats with :func:`knudsweep.identity.canonical`), its
    ``pid`` (``<name>/...``, from :mod:`knudsweep.identity`) and its ``index``:
    the coordinate label of the point along every gather dimension.
``solve(values, *, max_iter, section) -> SolverResult``
    Solve one point by calling the solver package.  Must not write files.
    ``max_iter`` may be None (solver default).  Raise only for programming
    errors; numerical trouble comes back as a result with status "failed".
``point_cost(values) -> float``
    Estimated seconds to solve and write one point on one core, from its
    parameters, with figures measured on this code (``benchmarks/``).  The
    batch planner (:mod:`knudsweep.batches`) fills batches up to a target
    duration with it; it only needs to be right within a factor of ~2.
``peak_memory_mb(section) -> (MB, point description)`` (optional)
    The largest memory one point needs, estimated from the grid sizes without
    expanding the grid; the study check refuses a study whose points do not
    fit ``execution.mem_mb_per_point``.
``warm_up()``
    Compile the numba kernels once on a tiny problem (each batch job calls it,
    under a lock, before its first point).
``gather_dims(section) -> dict[str, list]``
    Ordered gather dimensions and their coordinate labels (the sweep grid).
``dim_attrs(section) -> dict[str, dict]`` (optional)
    CF attributes of the dimension coordinates, extra coordinates along them.
``table_names(section) / tables(ds, section) -> dict[str, Table]``
    Tables written to ``results/<study>/tables/<name>.csv`` and ``.md``.
``figure_names(section) / figures(ds, section, settings) -> dict[str, Figure]``
    matplotlib figures written to ``results/<study>/figures/<name>.<fmt>``.
    Names must follow from the section alone (Snakemake needs them before
    anything is computed); a figure without data shows a "no data" note.
``figure_captions(ds, section) -> dict[str, str]``
    Report caption (reStructuredText) of every figure.
    The base class answers these five from the family's ``report`` module
    (its ``TABLES`` and ``FIGURES`` registries).
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from knudsweep.solver.walls import WALL_PARAMETERS

# One line per family: section name -> module holding ``FAMILY``.
REGISTRY: dict[str, str] = {
    "plane_channel": "knudsweep.families.plane_channel",
    "tube_duct": "knudsweep.families.tube_duct",
    "relaxation": "knudsweep.families.relaxation",
}


@dataclass(frozen=True)
class Point:
    """One point of a sweep: canonical values, identity and grid position."""

    family: str
    pid: str
    values: dict[str, Any]
    index: dict[str, Any]

    @property
    def relpath(self) -> str:
        return f"points/{self.pid}.nc"


@dataclass
class Table:
    """A table with units in its column headers and notes for the Markdown file."""

    frame: Any  # pandas.DataFrame
    title: str
    notes: list[str] = field(default_factory=list)


class Products:
    """Named products of a family (tables or figures), each builder registered with the rule naming its outputs.

    ``names(section)`` lists what the builders make for a section and ``build`` calls exactly those builders,
    checking that each returns the names it announced; figure builders carry their captions the same way.
    """

    def __init__(self, kind: str):
        self.kind = kind
        self._entries: list[tuple[Callable, Callable, Callable | None]] = []

    def register(self, names: Callable[[dict], list[str]], caption: Callable | None = None):
        """Decorator: ``builder(ds, section, *args) -> {name: product}`` for the names ``names(section)``;
        ``caption(ds, section) -> {name: text}`` for the same names."""

        def add(builder):
            self._entries.append((names, builder, caption))
            return builder

        return add

    def names(self, section: dict[str, Any]) -> list[str]:
        return [n for names, _, _ in self._entries for n in names(section)]

    def _made(self, names: list[str], made: dict[str, Any], what: str) -> dict[str, Any]:
        if list(made) != names:
            raise RuntimeError(f"{self.kind} {what}: built {list(made)}, announced {names}")
        return made

    def build(self, ds, section: dict[str, Any], *args) -> dict[str, Any]:
        out: dict[str, Any] = {}
        for names, builder, _ in self._entries:
            want = names(section)
            if want:
                out.update(self._made(want, builder(ds, section, *args), builder.__name__))
        return out

    def captions(self, ds, section: dict[str, Any]) -> dict[str, str]:
        out: dict[str, str] = {}
        for names, _, caption in self._entries:
            want = names(section)
            if want and caption is not None:
                out.update(self._made(want, caption(ds, section), caption.__name__))
        return out


class Family:
    """Base class of a solver family; see the module docstring for the protocol.

    The section-level methods forward to the family's ``grid`` module when it
    defines a function of the same name (``check_section``, ``points``,
    ``point_cost``, ``peak_memory_mb``, ``gather_dims``, ``dim_attrs``), so a
    subclass names its two modules and writes only ``solve`` and ``warm_up``.
    """

    name: str = ""
    grid: Any = None  # the family's grid module
    report: Any = None  # the family's report module (``TABLES``, ``FIGURES``)

    def _grid(self, what: str):
        return getattr(self.grid, what, None) if self.grid is not None else None

    def check_section(self, section: dict[str, Any]) -> None:
        check = self._grid("check_section")
        return check(section) if check else None

    def points(self, section: dict[str, Any]) -> list[Point]:
        if self._grid("points") is None:
            raise NotImplementedError
        return self.grid.points(section)

    def solve(self, values: dict[str, Any], *, max_iter: int | None, section: dict[str, Any]):
        raise NotImplementedError

    def point_cost(self, values: dict[str, Any]) -> float:
        cost = self._grid("point_cost")
        return cost(values) if cost else 1.0

    def peak_memory_mb(self, section: dict[str, Any]) -> tuple[float, str]:
        """Largest estimated memory of one point of ``section`` (MB) and which point; 0 if small."""
        peak = self._grid("peak_memory_mb")
        return peak(section) if peak else (0.0, "")

    def warm_up(self) -> None:
        return None

    def gather_dims(self, section: dict[str, Any]) -> dict[str, list]:
        if self._grid("gather_dims") is None:
            raise NotImplementedError
        return self.grid.gather_dims(section)

    def dim_attrs(self, section: dict[str, Any]) -> dict[str, dict]:
        attrs = self._grid("dim_attrs")
        return attrs(section) if attrs else {}

    def table_names(self, section: dict[str, Any]) -> list[str]:
        return self.report.TABLES.names(section) if self.report else []

    def tables(self, ds, section: dict[str, Any]) -> dict[str, Table]:
        return self.report.TABLES.build(ds, section) if self.report else {}

    def figure_names(self, section: dict[str, Any]) -> list[str]:
        return self.report.FIGURES.names(section) if self.report else []

    def figures(self, ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
        return self.report.FIGURES.build(ds, section, settings) if self.report else {}

    def figure_captions(self, ds, section: dict[str, Any]) -> dict[str, str]:
        return self.report.FIGURES.captions(ds, section) if self.report else {}


def check_axis_choice(section: dict[str, Any]) -> str:
    """Exactly one of ``delta`` and ``kn`` must be given; returns the one that is."""
    has_delta, has_kn = "delta" in section, "kn" in section
    if has_delta == has_kn:
        raise ValueError("delta: give exactly one of 'delta' and 'kn' (both positive axes)")
    return "delta" if has_delta else "kn"


def delta_values(section: dict[str, Any]) -> list[float]:
    """Canonical delta values of a section, ascending (a ``kn`` axis converted by delta = sqrt(pi)/(2 Kn))."""
    import math

    from knudsweep.config import axis_values
    from knudsweep.identity import canonical

    if "delta" in section:
        raw = axis_values("delta", section["delta"])
    else:
        raw = [math.sqrt(math.pi) / (2.0 * kn) for kn in axis_values("kn", section["kn"])]
    return sorted(canonical(d) for d in raw)


def grid_label(section: dict[str, Any]) -> str:
    """Path label of a section's resolution: ``acc<target>-tol<tol>`` or ``ns<n>-nv<n>-tol<tol>``."""
    from knudsweep.identity import format_exp

    res = section["resolution"]
    if res.get("accuracy") is not None:
        return f"acc{format_exp(res['accuracy'])}-tol{format_exp(res['tol'])}"
    ns = "auto" if res["n_space"] is None else str(res["n_space"])
    nv = "auto" if res["n_velocity"] is None else str(res["n_velocity"])
    return f"ns{ns}-nv{nv}-tol{format_exp(res['tol'])}"


WALL_KEYS = WALL_PARAMETERS  # each wall law's parameter keys, from the registry in knudsweep.solver.walls


def wall_params(spec: dict[str, Any], where: str) -> dict[str, Any]:
    """Canonical ``{model, <its accommodation keys>}`` of one wall spec; checks keys and ranges.

    ``where`` prefixes the key path in the error (``walls[0]``, ``walls[0].upper``).
    """
    from knudsweep.identity import canonical
    from knudsweep.solver.walls import make_wall

    model = spec.get("model", "maxwell")
    allowed = WALL_KEYS[model]
    for key in dict.fromkeys(k for keys in WALL_KEYS.values() for k in keys):
        if key in spec and key not in allowed:
            raise ValueError(
                f"{where}.{key}: not a parameter of wall model {model!r}; its parameters are {', '.join(allowed)}"
            )
    params = {key: canonical(spec.get(key, 1.0)) for key in allowed}
    try:
        make_wall(model, **params)
    except ValueError as exc:
        raise ValueError(f"{where}.{exc}") from None
    return {"model": model, **params}


def one_wall_label(w: dict[str, Any]) -> str:
    """Readable, path-safe label: ``maxwell-alpha=0.9`` or ``cercignani_lampis-alpha_t=1.0-alpha_n=0.5``."""
    from knudsweep.identity import format_plain

    return "-".join([w["model"]] + [f"{k}={format_plain(w[k])}" for k in WALL_KEYS[w["model"]]])


def make_wall_object(w: dict[str, Any] | None):
    """The solver wall object of canonical wall params (None stays None)."""
    from knudsweep.solver.walls import make_wall

    return None if w is None else make_wall(w["model"], **{k: w[k] for k in WALL_KEYS[w["model"]]})


def reject_repeats(key: str, labels: list[str]) -> None:
    """ValueError naming ``key[i]`` when a label repeats an earlier one."""
    for i, label in enumerate(labels):
        if label in labels[:i]:
            raise ValueError(f"{key}[{i}]: repeats {key}[{labels.index(label)}] ({label})")


# ---------------------------------------------------------------- gas-dependent collision operators
# Shared by the channel families (plane_channel, tube_duct): a linearized Boltzmann model whose operator depends on
# the gas (VHS: the viscosity index omega of config/gases.yaml) is solved once per gas of the section.


def _gas_models() -> tuple[str, ...]:
    from knudsweep.solver import kinetic_models

    return tuple(m for m, molecule in kinetic_models.BOLTZMANN_MODELS.items() if molecule == "vhs")


GAS_MODELS = _gas_models()


def model_label(model: str, gas: str | None) -> str:
    """Label of a model along the gathered ``model`` dimension: the model, or ``<model>-<gas>`` for GAS_MODELS."""
    return model if gas is None else f"{model}-{gas}"


def model_entries(section: dict[str, Any]) -> list[tuple[str, str, str | None]]:
    """``[(label, model, gas-or-None), ...]`` in the order of the section's models (GAS_MODELS once per gas)."""
    out = []
    for model in section["models"]:
        if model in GAS_MODELS:
            out += [(model_label(model, gas), model, gas) for gas in section["gases"]]
        else:
            out.append((model, model, None))
    return out


def model_labels(section: dict[str, Any]) -> list[str]:
    """Labels of the gathered ``model`` dimension (:func:`model_entries`)."""
    return [label for label, _, _ in model_entries(section)]


def gas_omega(gas: str) -> float:
    """The VHS viscosity index omega of ``gas`` (config/gases.yaml, knudsweep.solver.gas), canonical."""
    from knudsweep.identity import canonical
    from knudsweep.solver.gas import get_gas

    return canonical(get_gas(gas).omega)


def required_keys(section: dict[str, Any]) -> dict[str, str]:
    """Keys the study must give itself (their schema default is not enough), with the reason."""
    gas_models = [m for m in section["models"] if m in GAS_MODELS]
    if not gas_models:
        return {}
    return {
        "gases": f"model {gas_models[0]} is solved for each gas with its viscosity index omega "
        "(config/gases.yaml); list the gases, e.g. gases: [Ar]"
    }


def resolution_values(resolution: dict[str, Any]) -> dict[str, Any]:
    """The canonical resolution entries of a point's values: n_space, n_velocity, tol, accuracy."""
    from knudsweep.identity import canonical

    return {
        "n_space": resolution.get("n_space"),
        "n_velocity": resolution.get("n_velocity"),
        "tol": canonical(resolution["tol"]),
        "accuracy": None if resolution.get("accuracy") is None else canonical(resolution["accuracy"]),
    }


def gas_values(model: str, gas: str | None) -> dict[str, Any]:
    """``{gas, omega}`` of a point of a gas-dependent model (GAS_MODELS); empty for the others."""
    if model not in GAS_MODELS:
        return {}
    if gas is None:
        raise ValueError(f"gas: model {model} needs a gas (its viscosity index omega)")
    return {"gas": gas, "omega": gas_omega(gas)}


def model_gas_coordinates(section: dict[str, Any]) -> dict[str, Any]:
    """Extra coordinates along ``model`` when a model depends on the gas: its gas and viscosity index."""
    entries = model_entries(section)
    if not any(gas is not None for _, _, gas in entries):
        return {}
    return {
        "extra": {
            "model_gas": (
                [gas or "" for _, _, gas in entries],
                {"long_name": "gas of a gas-dependent collision operator (empty: the model does not depend on it)"},
            ),
            "omega": (
                [gas_omega(gas) if gas is not None else float("nan") for _, _, gas in entries],
                {"units": "1", "long_name": "VHS viscosity index omega of the gas (mu ~ T^omega)"},
            ),
        }
    }


def base_model(label: str) -> tuple[str, str | None]:
    """(model, gas-or-None) of a label of the ``model`` dimension (``boltzmann_vhs-Ar`` -> boltzmann_vhs, Ar)."""
    for model in GAS_MODELS:
        if label.startswith(model + "-"):
            return model, label[len(model) + 1 :]
    return label, None


def model_error_ratio(g_model, e_model, g_ref, e_ref):
    """Ratio G_model / G_ref and its discretisation error estimate |ratio| (|e_model / G_model| + |e_ref / G_ref|)
    (first-order propagation, the two estimates added as bounds)."""
    import numpy as np

    g_model, g_ref = np.asarray(g_model, float), np.asarray(g_ref, float)
    ratio = g_model / g_ref
    err = np.abs(ratio) * (np.abs(np.asarray(e_model, float) / g_model) + np.abs(np.asarray(e_ref, float) / g_ref))
    return ratio, err


def coefficient_values(ds, key: str, **where):
    """Float values of ``key`` at the selection ``where`` along ``delta`` (NaN if the sweep lacks ``key``)."""
    import numpy as np

    if key not in ds:
        return np.full(ds.sizes["delta"], np.nan)
    return ds[key].sel(**where).values.astype(float)


def model_error_sentences(ds, references, keys, model_text) -> list[str]:
    """Caption sentences of a model-error figure: the relative error estimate of each Boltzmann flow rate
    and the status of each Boltzmann operator's points (knudsweep.report)."""
    from knudsweep.report import relative_error_sentence, status_sentence

    text = []
    for ref in references:
        for key in keys:
            where = {"problem": "poiseuille" if key == "G_P" else "thermal_creep", "model": ref}
            text.append(relative_error_sentence(ds, key, where, f"{key} ({model_text(ref)})"))
        text.append(status_sentence(ds, {"model": ref}))
    return text


def plot_model_error(ax, ds, reference: str, equations, key: str, sel: dict[str, str], index: int, marker_of) -> bool:
    """Draw each model equation's ``key`` over the Boltzmann value of ``reference`` against delta at the selection
    ``sel`` (cross-section, wall), in series style ``index`` with ``marker_of(model)``, with the ratio's error
    estimate as bars; True if anything was drawn."""
    import numpy as np

    from knudsweep import plot_style as ps

    delta = ds["delta"].values.astype(float)
    where = dict(problem="poiseuille" if key == "G_P" else "thermal_creep", **sel)
    g_ref = coefficient_values(ds, key, model=reference, **where)
    e_ref = coefficient_values(ds, f"{key}_error_estimate", model=reference, **where)
    drawn = False
    for m in equations:
        ratio, err = model_error_ratio(
            coefficient_values(ds, key, model=m, **where),
            coefficient_values(ds, f"{key}_error_estimate", model=m, **where),
            g_ref,
            e_ref,
        )
        style = {**ps.series_style(index), **marker_of(m)}
        if ps.plot_series(ax, delta, ratio, style, logy=False):
            drawn = True
            ok = np.isfinite(ratio) & np.isfinite(err)
            ax.errorbar(
                delta[ok],
                ratio[ok],
                yerr=err[ok],
                fmt="none",
                ecolor=style["color"],
                elinewidth=0.8,
                capsize=0,
                zorder=ps.DATA_Z,
            )
    return drawn


MODEL_ERROR_NOTES = [
    "error estimate columns: estimated discretisation errors (absolute), Richardson over a coarser solve "
    "(knudsweep.solver.resolution); the ratio's estimate adds the two relative estimates. They do not include any "
    "modelling error.",
    "Empty cells: a point failed, is missing or corrupt (the Boltzmann status column says which for the "
    "Boltzmann value).",
]


def model_error_rows(ds, reference: str, equations, keys, sel: dict[str, str], model_text) -> list[dict[str, Any]]:
    """Rows of a model-error table: per delta, G_P and G_T of the linearized Boltzmann model ``reference`` (a
    label of the ``model`` dimension) with status and estimate, and each model equation's ratio to it with the
    ratio's estimate (:func:`model_error_ratio`); ``sel`` picks the cross-section and wall (its keys lead the
    row after the Boltzmann model and gas), ``model_text`` turns a model name into words."""
    import math

    values = coefficient_values
    cols: dict[str, Any] = {}
    for key in keys:
        where = dict(problem="poiseuille" if key == "G_P" else "thermal_creep", **sel)
        g_ref = values(ds, key, model=reference, **where)
        e_ref = values(ds, f"{key}_error_estimate", model=reference, **where)
        cols[f"{key} Boltzmann [1]"] = g_ref
        cols[f"{key} Boltzmann error estimate [1]"] = e_ref
        cols[f"{key} Boltzmann status"] = ds["status"].sel(model=reference, **where).values
        for m in equations:
            ratio, err = model_error_ratio(
                values(ds, key, model=m, **where), values(ds, f"{key}_error_estimate", model=m, **where), g_ref, e_ref
            )
            cols[f"{key} {model_text(m)} / Boltzmann [1]"] = ratio
            cols[f"{key} {model_text(m)} / Boltzmann error estimate [1]"] = err
    gas = base_model(reference)[1] or ""
    rows = []
    for j, d in enumerate(ds["delta"].values.astype(float)):
        row = {"Boltzmann model": model_text(reference), "gas": gas, **sel, "delta [1]": d}
        row["Kn [1]"] = math.sqrt(math.pi) / (2.0 * d)
        row.update({k: (v[j] if v.dtype.kind in "OUS" else float(v[j])) for k, v in cols.items()})
        rows.append(row)
    return rows


def get_family(name: str) -> Family:
    """The registered family ``name`` (ValueError lists the known ones)."""
    if name not in REGISTRY:
        raise ValueError(f"family: unknown family {name!r}; known families are {', '.join(REGISTRY)}")
    return importlib.import_module(REGISTRY[name]).FAMILY


def family_sections(study: dict[str, Any] | None) -> list[str]:
    """Registered families present in ``study`` (all registered ones if None), in registry order."""
    if study is None:
        return list(REGISTRY)
    return [name for name in REGISTRY if name in study]
