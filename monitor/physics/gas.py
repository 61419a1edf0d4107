"""Gas properties of the propellants ejecta knows, from a real-gas equation of state or the ideal-gas law.

Real-gas values come from CoolProp's Helmholtz-energy equations of state (Span et al. 2000 for nitrogen,
Lemmon et al. 2000 for air, Ortiz-Vega et al. for helium, Tegeler et al. 1999 for argon, Span & Wagner 1996
for carbon dioxide). The ideal model is a calorically perfect gas, p = rho R T with constant cp and gamma
taken from the ideal-gas heat capacity at 298.15 K, for comparison and for quick checks.

Every function takes floats or numpy arrays and returns arrays of the broadcast shape (0-d for scalars).
A state outside a model's range, or a liquid or two-phase state, raises PhysicsError instead of giving NaN.
"""

from __future__ import annotations

import contextlib
import contextvars
from dataclasses import dataclass
from functools import lru_cache
from typing import Callable, Iterator, Literal, Protocol

import numpy as np

from monitor.errors import PhysicsError
from monitor.units import R_J_PER_MOL_K

GasModelName = Literal["real", "ideal"]

# Canonical name -> CoolProp fluid name.
_COOLPROP_NAMES: dict[str, str] = {
    "nitrogen": "Nitrogen",
    "air": "Air",
    "helium": "Helium",
    "argon": "Argon",
    "carbon_dioxide": "CarbonDioxide",
}
_ALIASES: dict[str, str] = {
    "n2": "nitrogen",
    "he": "helium",
    "ar": "argon",
    "co2": "carbon_dioxide",
    "carbon dioxide": "carbon_dioxide",
    "carbondioxide": "carbon_dioxide",
}
SUPPORTED_GASES: tuple[str, ...] = tuple(_COOLPROP_NAMES)
_IDEAL_REFERENCE_T_K = 298.15
_IDEAL_REFERENCE_P_PA = 101325.0
_MODELS = ("real", "ideal")


def canonical_gas(name: str) -> str:
    """Return the canonical name of a gas ("N2" -> "nitrogen").

    Raises:
        PhysicsError: the gas is not one ejecta has an equation of state for.
    """
    key = str(name).strip().lower().replace("-", "_")
    key = _ALIASES.get(key, key)
    if key not in _COOLPROP_NAMES:
        raise PhysicsError(f"unknown gas {name!r}: expected one of {', '.join(SUPPORTED_GASES)} (or N2, He, Ar, CO2)")
    return key


class StateStore(Protocol):
    """Where results of a rig's setup calls may be kept between runs (injected at the edge: monitor.gas_memo)."""

    def recall(self, kind: str, parts: tuple, compute: Callable[[], dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
        """compute()'s arrays, or the ones stored for the same kind and parts."""


_store: StateStore | None = None
_cacheable: contextvars.ContextVar[bool] = contextvars.ContextVar("ejecta_cacheable_gas_calls", default=False)


def install_store(store: StateStore | None) -> StateStore | None:
    """Use store for the calls made inside cacheable() (None: compute every call); returns the one before."""
    global _store
    previous, _store = _store, store
    return previous


@contextlib.contextmanager
def cacheable() -> Iterator[None]:
    """Mark the gas calls made within as a rig's setup: deterministic, few, worth keeping between runs."""
    token = _cacheable.set(True)
    try:
        yield
    finally:
        _cacheable.reset(token)


def _recall(kind: str, parts: tuple, compute: Callable[[], dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
    store = _store if _cacheable.get() else None
    return compute() if store is None else store.recall(kind, parts, compute)


def _check_model(model: str) -> None:
    if model not in _MODELS:
        raise PhysicsError(f"unknown gas model {model!r}: expected 'real' or 'ideal'")


@lru_cache(maxsize=None)
def _cp():
    """Import CoolProp on first use only: it takes about two seconds to load."""
    import CoolProp.CoolProp as coolprop

    return coolprop


@lru_cache(maxsize=None)
def molar_mass_kg_mol(gas: str) -> float:
    """Molar mass of the gas, kg/mol (from the equation of state's fluid file)."""
    fluid = _COOLPROP_NAMES[canonical_gas(gas)]
    return float(_recall("molar_mass", (fluid,), lambda: {"value": np.array(_cp().PropsSI("M", fluid))})["value"])


def specific_gas_constant_j_kg_k(gas: str) -> float:
    """Specific gas constant R/M, J/(kg K)."""
    return R_J_PER_MOL_K / molar_mass_kg_mol(gas)


@lru_cache(maxsize=None)
def ideal_gamma(gas: str) -> float:
    """Ratio of ideal-gas heat capacities cp0/cv0 at 298.15 K (dimensionless)."""
    fluid = _COOLPROP_NAMES[canonical_gas(gas)]
    cp0 = float(_recall("ideal_cp", (fluid, _IDEAL_REFERENCE_T_K, _IDEAL_REFERENCE_P_PA), lambda: {"value": np.array(
        _cp().PropsSI("Cp0mass", "T", _IDEAL_REFERENCE_T_K, "P", _IDEAL_REFERENCE_P_PA, fluid))})["value"])
    return cp0 / (cp0 - specific_gas_constant_j_kg_k(gas))


@dataclass(frozen=True)
class GasState:
    """Thermodynamic state(s) of a gas; every field is an array of the same shape, SI units."""

    pressure_pa: np.ndarray
    temperature_k: np.ndarray
    density_kg_m3: np.ndarray
    enthalpy_j_kg: np.ndarray
    entropy_j_kg_k: np.ndarray
    gamma: np.ndarray  # cp/cv of the state
    speed_of_sound_m_s: np.ndarray
    compressibility: np.ndarray  # Z = p / (rho R T)


_INPUTS = {
    ("pressure", "temperature"): ("P", "T"),
    ("density", "temperature"): ("D", "T"),
    ("density", "entropy"): ("D", "S"),
    ("pressure", "enthalpy"): ("P", "H"),
    ("density", "pressure"): ("D", "P"),
    ("pressure", "entropy"): ("P", "S"),
}


def gas_state(gas: str, model: GasModelName = "real", **inputs: object) -> GasState:
    """Full state from two independent properties.

    Args:
        gas: a name accepted by canonical_gas.
        model: "real" (equation of state) or "ideal" (calorically perfect gas).
        **inputs: exactly two of pressure (Pa, absolute), temperature (K), density (kg/m^3),
            enthalpy (J/kg), entropy (J/(kg K)), in one of the pairs of _INPUTS. Arrays broadcast.
            Enthalpy and entropy are on the model's own reference state: take them from a state
            of the same model, never across models.

    Returns:
        GasState with every field broadcast to the inputs' shape.

    Raises:
        PhysicsError: unknown gas or model, an unsupported input pair, or a state outside the model
            (non-finite, non-positive, below the melting line, liquid or two-phase).
    """
    _check_model(model)
    gas = canonical_gas(gas)
    order = ["density", "pressure", "temperature", "enthalpy", "entropy"]
    unknown = sorted(set(inputs) - set(order))
    if unknown:
        raise PhysicsError(f"gas_state got unknown input(s) {unknown}: expected two of {order}")
    names = tuple(sorted(inputs, key=order.index))
    pair = _INPUTS.get(names)  # type: ignore[arg-type]
    if pair is None:
        raise PhysicsError(f"gas_state needs one of the input pairs {sorted(_INPUTS)}, got {names}")
    a, b = np.broadcast_arrays(*(np.asarray(inputs[n], dtype=float) for n in names))
    for name, arr in zip(names, (a, b)):
        if not np.all(np.isfinite(arr)):
            raise PhysicsError(f"{gas}: {name} must be finite, got {arr}")
        if name in ("pressure", "temperature", "density") and np.any(arr <= 0.0):
            raise PhysicsError(f"{gas}: {name} must be positive, got {arr}")
    if model == "ideal":
        return _ideal_state(gas, names, a, b)
    if _store is None or not _cacheable.get():
        return _real_state(gas, pair, a, b)
    stored = _store.recall("gas_state", (gas, pair, a, b), lambda: _state_or_error(gas, pair, a, b))
    if "error" in stored:
        raise PhysicsError(str(stored["error"]))
    return GasState(*(stored[name] for name in GasState.__dataclass_fields__))


def _state_or_error(gas: str, pair: tuple[str, str], a: np.ndarray, b: np.ndarray) -> dict[str, np.ndarray]:
    """_real_state's fields as arrays, or its PhysicsError's message as "error" (for the memo)."""
    try:
        state = _real_state(gas, pair, a, b)
    except PhysicsError as exc:
        return {"error": np.array(str(exc))}
    return {name: np.asarray(getattr(state, name)) for name in GasState.__dataclass_fields__}


@lru_cache(maxsize=None)
def _abstract_state(fluid: str):
    return _cp().AbstractState("HEOS", fluid)


_PARAMS = {"P": "iP", "T": "iT", "D": "iDmass", "H": "iHmass", "S": "iSmass"}


def _real_state(gas: str, pair: tuple[str, str], a: np.ndarray, b: np.ndarray) -> GasState:
    """One equation-of-state flash per point through CoolProp's AbstractState, then every output from it."""
    import CoolProp

    fluid = _COOLPROP_NAMES[gas]
    state = _abstract_state(fluid)
    shape = a.shape
    a1, b1 = np.atleast_1d(a).ravel(), np.atleast_1d(b).ravel()
    key_a, key_b = (getattr(CoolProp, _PARAMS[k]) for k in pair)
    input_pair, first, _ = _cp().generate_update_pair(key_a, 1.0, key_b, 2.0)
    swapped = first != 1.0
    out = np.empty((a1.size, 9))
    condensed = (CoolProp.iphase_liquid, CoolProp.iphase_twophase)
    for i in range(a1.size):
        x, y = (b1[i], a1[i]) if swapped else (a1[i], b1[i])
        try:
            state.update(input_pair, x, y)
            phase = state.phase()
            out[i] = (
                state.p(),
                state.T(),
                state.rhomass(),
                state.hmass(),
                state.smass(),
                state.cpmass() / state.cvmass(),
                state.speed_sound(),
                state.compressibility_factor(),
                1.0 if phase in condensed else 0.0,
            )
        except ValueError as exc:
            if "two-phase" in str(exc) or "twophase" in str(exc):
                raise PhysicsError(
                    f"{gas}: liquid or two-phase at {pair[0]}={a1[i]:.6g}, {pair[1]}={b1[i]:.6g}; "
                    "ejecta's gauges model single-phase gas only"
                ) from exc
            raise PhysicsError(
                f"{gas}: no real-gas state at {pair[0]}={a1[i]:.6g}, {pair[1]}={b1[i]:.6g} (outside the equation of state: {exc})"
            ) from exc
    _reject_condensed(gas, out[:, 8], out[:, 0], out[:, 1])
    if not np.all(np.isfinite(out[:, :8])):
        index = int(np.argmax(~np.isfinite(out[:, :8]).any(axis=1)))
        raise PhysicsError(
            f"{gas}: no real-gas state at {pair[0]}={a1[index]:.6g}, {pair[1]}={b1[index]:.6g} "
            "(outside the equation of state's range)"
        )
    columns = [out[:, k].reshape(shape) for k in range(8)]
    return GasState(*columns)


def _reject_condensed(gas: str, condensed: np.ndarray, pressure: np.ndarray, temperature: np.ndarray) -> None:
    if np.any(condensed > 0.0):
        index = int(np.argmax(condensed > 0.0))
        raise PhysicsError(
            f"{gas}: liquid or two-phase at {pressure[index] / 1e5:.4g} bar abs, {temperature[index]:.5g} K; "
            "ejecta's gauges model single-phase gas only"
        )


def _ideal_state(gas: str, names: tuple[str, ...], a: np.ndarray, b: np.ndarray) -> GasState:
    r = specific_gas_constant_j_kg_k(gas)
    gamma = ideal_gamma(gas)
    cp = gamma * r / (gamma - 1.0)
    given = dict(zip(names, (a, b)))
    t_ref, p_ref = _IDEAL_REFERENCE_T_K, _IDEAL_REFERENCE_P_PA
    if "temperature" in given:
        t = given["temperature"]
        p = given["pressure"] if "pressure" in given else given["density"] * r * t
    elif "enthalpy" in given:
        t = given["enthalpy"] / cp + t_ref
        p = given["pressure"]
    elif names == ("density", "pressure"):
        p = given["pressure"]
        t = p / (given["density"] * r)
    elif names == ("density", "entropy"):
        # s = cp ln(T/Tref) - R ln(p/pref) with p = rho R T  =>  solve for T.
        rho, s = given["density"], given["entropy"]
        cv = cp - r
        t = t_ref * np.exp((s + r * np.log(rho * r * t_ref / p_ref)) / cv)
        p = rho * r * t
    else:  # pressure, entropy
        p, s = given["pressure"], given["entropy"]
        t = t_ref * np.exp((s + r * np.log(p / p_ref)) / cp)
    if np.any(t <= 0.0) or not np.all(np.isfinite(t)):
        raise PhysicsError(f"{gas}: ideal-gas temperature not positive for inputs {given}")
    rho = p / (r * t)
    h = cp * (t - t_ref)
    s = cp * np.log(t / t_ref) - r * np.log(p / p_ref)
    shape = np.shape(t)
    return GasState(
        pressure_pa=np.asarray(p, dtype=float),
        temperature_k=np.asarray(t, dtype=float),
        density_kg_m3=np.asarray(rho, dtype=float),
        enthalpy_j_kg=np.asarray(h, dtype=float),
        entropy_j_kg_k=np.asarray(s, dtype=float),
        gamma=np.full(shape, gamma),
        speed_of_sound_m_s=np.sqrt(gamma * r * t),
        compressibility=np.ones(shape),
    )


def density_kg_m3(gas: str, pressure_pa, temperature_k, model: GasModelName = "real") -> np.ndarray:
    """Density from absolute pressure (Pa) and temperature (K), kg/m^3."""
    return gas_state(gas, model, pressure=pressure_pa, temperature=temperature_k).density_kg_m3


def pressure_pa(gas: str, density_kg_m3, temperature_k, model: GasModelName = "real") -> np.ndarray:
    """Absolute pressure from density (kg/m^3) and temperature (K), Pa."""
    return gas_state(gas, model, density=density_kg_m3, temperature=temperature_k).pressure_pa
