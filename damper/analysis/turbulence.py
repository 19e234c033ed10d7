"""Continuous vertical turbulence: rms responses by covariance analysis, batched.

For each member of a batch of loops (conditions x gains x ...), bare and with the damper,
the stationary response to the Dryden vertical gust (:mod:`damper.model.dryden`) is found
from the Lyapunov equation of the loop driven by the gust's spectral factor:

* state space: the closed loop of :func:`damper.model.loop.closed_loop_matrix` (the
  delay as an ``(n, n)`` Pade approximant of the loop's configured order) in series with
  the two-state shaping filter, driven by unit-intensity white noise;
* the gust is an angle-of-attack disturbance ``alpha_g = w_g / V`` added to the
  aerodynamic angle of attack: it enters the airframe's equations through the column of
  the airframe matrix that multiplies ``alpha`` (``Z_alpha / V`` in ``alpha'``,
  ``M_alpha + M_alpha_dot Z_alpha / V`` in ``q'``, and ``X_alpha`` in ``u'`` for the
  longitudinal model); ``M_alpha_dot`` acts on it only through the substituted ``alpha'``:
  the term ``M_alpha_dot alpha_g'`` is neglected, as for the discrete gusts
  (docs/responses.md), and so are gust penetration and the pitching gust;
* the incremental load factor includes the gust's own angle of attack,
  ``n_z = -(Z_alpha (alpha + alpha_g) + Z_q q + Z_delta delta) / g0`` (plus ``-Z_u u / g0``
  for the longitudinal model);
* ``A P + P A^T + B B^T = 0`` (:func:`damper.measures.covariance.solve_lyapunov`); each
  rms is ``sqrt(c P c^T)`` for the output row ``c``; the rms of a derivative uses the row
  ``c A``, which exists only where ``c B = 0`` (exactly: the noise enters the filter only);
* expected exceedance rates by Rice's formula
  (:func:`damper.measures.covariance.crossing_rate`), counting both signs.

See docs/turbulence.md for the model, the standard's values and what is NaN and why.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..atmosphere import G0
from ..measures.covariance import crossing_rate, quadratic_form, solve_lyapunov
from ..model import airframes, dryden
from ..model.batch import batch_shape, map_arrays
from ..model.loop import Hardware, Loop, closed_loop_matrix, feedback_sign, plant_state_space
from ..quantities import quantity

#: The fields of the JSON contract (issue 22), in order.
CONTRACT_FIELDS = (
    "gust_rms_m_s",
    "scale_length_m",
    "rms_pitch_rate_rad_s",
    "rms_load_factor_g",
    "rms_angle_of_attack_rad",
    "rms_surface_rad",
    "rms_surface_rate_rad_s",
    "rate_limit_exceedances_per_s",
    "authority_exceedances_per_s",
)
#: Fields that have no value for the bare airframe (no damper: the surface does not move).
DAMPER_FIELDS = (
    "rms_surface_rad",
    "rms_surface_rate_rad_s",
    "rate_limit_exceedances_per_s",
    "authority_exceedances_per_s",
    "rms_damper_command_rad",
    "rms_damper_command_rate_rad_s",
)
_RMS_FIELDS = ("rms_pitch_rate_rad_s", "rms_load_factor_g", "rms_angle_of_attack_rad") + DAMPER_FIELDS

#: A member is taken as stable when the largest real part of its eigenvalues is below
#: ``-STABILITY_TOLERANCE * max|eigenvalue|`` (1/s): a root on the imaginary axis has no
#: stationary variance.
STABILITY_TOLERANCE = 1e-10

REASON_UNSTABLE = "closed loop not asymptotically stable (delay as a Pade approximant): no stationary response"
REASON_UNSTABLE_BARE = "bare airframe not asymptotically stable: no stationary response"
REASON_BARE = "bare airframe: no damper, the surface does not move"
REASON_NO_RATE_LIMIT = "no actuator rate limit given"
REASON_NO_AUTHORITY = "no damper authority given"
REASON_RATE_UNBOUNDED = "unbounded: the surface rate has a white-noise part with this hardware"
REASON_COMMAND_RATE_UNBOUNDED = "unbounded: the damper command's rate has a white-noise part with this hardware"
REASON_RATE_CROSSINGS_UNBOUNDED = (
    "unbounded: with this hardware (e.g. ideal actuator and sensor) the surface acceleration has a "
    "white-noise part, so the surface rate crosses any level infinitely often"
)


@dataclass(frozen=True)
class GustModel:
    """The loop (or bare airframe) in series with the gust's spectral factor, batched (flat).

    Attributes
    ----------
    A : ndarray, shape ``(N, n, n)``
        State matrix, 1/s: loop states (signal order of
        :func:`damper.model.loop.plant_state_space`, less any pure integrator that feeds
        nothing) then the two filter states.
    B : ndarray, shape ``(N, n)``
        Unit-intensity white noise into the state derivatives (into the filter only).
    rows : dict
        Output rows, each ``(N, n)``: ``pitch_rate`` (rad/s), ``angle_of_attack`` (rad, the
        airframe's state, without the gust's angle), ``load_factor`` (g, with the gust's
        angle), ``surface`` (rad, actuator output), ``damper_command`` (rad, actuator
        input: the damper's command) and ``gust`` (w_g, m/s).
    stable : ndarray of bool, shape ``(N,)``
        Asymptotically stable (the filter always is).
    largest_real_part : ndarray, shape ``(N,)``
        Largest real part of the eigenvalues of ``A``, 1/s.
    delay_model : str
        How the delay enters (``"Pade (n, n) approximant"`` or ``"no delay"``).
    """

    A: np.ndarray
    B: np.ndarray
    rows: dict
    stable: np.ndarray
    largest_real_part: np.ndarray
    delay_model: str


@dataclass(frozen=True)
class TurbulenceResult:
    """Stationary response to continuous vertical turbulence (arrays of the batch shape).

    The first nine fields are the JSON contract of issue 22 (:data:`CONTRACT_FIELDS`);
    NaN (``null`` in JSON) where undefined or unbounded, with the reason in `reasons`.

    Attributes
    ----------
    gust_rms_m_s : ndarray
        rms vertical gust velocity sigma_w, m/s.
    scale_length_m : ndarray
        Dryden vertical scale length L_w, m.
    rms_pitch_rate_rad_s : ndarray
        rad/s.
    rms_load_factor_g : ndarray
        Incremental normal load factor (with the gust's own angle of attack), g.
    rms_angle_of_attack_rad : ndarray
        The airframe's angle-of-attack state (without the gust's angle), rad.
    rms_surface_rad : ndarray
        Surface deflection (actuator output), rad.
    rms_surface_rate_rad_s : ndarray
        Surface rate, rad/s.
    rate_limit_exceedances_per_s : ndarray
        Expected number per second of surface-rate excursions beyond the actuator's rate
        limit, either sign (Rice).
    authority_exceedances_per_s : ndarray
        Expected number per second of damper-command excursions beyond the damper's
        authority, either sign (Rice).
    rms_damper_command_rad : ndarray
        The damper's command (actuator input), rad (not in the JSON contract).
    rms_damper_command_rate_rad_s : ndarray
        Its rate, rad/s (not in the JSON contract).
    stable : ndarray of bool
        The loop (Pade delay) is asymptotically stable.
    reasons : dict
        Field name -> ndarray of str of the batch shape: why the value is NaN ("" where
        it is defined).
    delay_model : str
        ``"Pade (n, n) approximant"`` or ``"no delay"``.
    bare : bool
        True for the bare airframe.
    """

    gust_rms_m_s: np.ndarray = quantity("m/s")
    scale_length_m: np.ndarray = quantity("m")
    rms_pitch_rate_rad_s: np.ndarray = quantity("rad/s")
    rms_load_factor_g: np.ndarray = quantity("g")
    rms_angle_of_attack_rad: np.ndarray = quantity("rad")
    rms_surface_rad: np.ndarray = quantity("rad")
    rms_surface_rate_rad_s: np.ndarray = quantity("rad/s")
    rate_limit_exceedances_per_s: np.ndarray = quantity("1/s", key="rate_limit_exceedances_per_s")
    authority_exceedances_per_s: np.ndarray = quantity("1/s", key="authority_exceedances_per_s")
    rms_damper_command_rad: np.ndarray = quantity("rad")
    rms_damper_command_rate_rad_s: np.ndarray = quantity("rad/s")
    stable: np.ndarray
    reasons: dict = field(default_factory=dict)
    delay_model: str = "no delay"
    bare: bool = False

    def record(self, index=()) -> dict:
        """The JSON-contract fields of one batch member as floats (NaN kept as NaN)."""
        return {name: float(np.asarray(getattr(self, name))[index]) for name in CONTRACT_FIELDS}

    def reasons_at(self, index=(), contract_only=False) -> dict:
        """Field name -> reason for every NaN field of one batch member.

        With ``contract_only`` only the fields of the JSON contract (:data:`CONTRACT_FIELDS`).
        """
        out = {}
        for name, texts in self.reasons.items():
            text = str(np.asarray(texts)[index])
            if text and (not contract_only or name in CONTRACT_FIELDS):
                out[name] = text
        return out


@dataclass(frozen=True)
class TurbulenceStudy:
    """Bare and augmented responses to the same turbulence.

    Attributes
    ----------
    bare : TurbulenceResult
        The airframe alone (no damper, no hardware).
    closed_loop : TurbulenceResult
        With the damper at the loop's gain.
    """

    bare: TurbulenceResult
    closed_loop: TurbulenceResult


# ------------------------------------------------------------------------------------
# state space
# ------------------------------------------------------------------------------------


def _flat_loop(loop: Loop, shape):
    return map_arrays(loop, lambda a: np.ascontiguousarray(np.broadcast_to(a, shape)).reshape(-1))


def _block(layout, label):
    return next((start, stop) for name, start, stop in layout.blocks if name == label)


def _surface_rows(loop: Loop, layout, cp, nb):
    """Rows of the damper command (actuator input) and the surface (actuator output)."""
    kfb = -feedback_sign(loop.airframe) * np.asarray(loop.gain, dtype=float)
    command = kfb[:, None] * cp
    act = loop.hardware.actuator
    if act is None:
        return command, command.copy()
    start, stop = _block(layout, "actuator")
    _, _, ca, da = (np.asarray(m, dtype=float) for m in act.state_space())
    surface = np.broadcast_to(da[..., 0, 0], (nb,))[:, None] * command
    surface[:, start:stop] += np.broadcast_to(ca[..., 0, :], (nb, stop - start))
    return command, surface


def _assemble(loop: Loop, gust_rms, scale_length):
    """Unreduced state space of loop + filter and its output rows (flat batch)."""
    d = loop.airframe
    nb = np.shape(d.airspeed)[0]
    A_cl, _, layout = closed_loop_matrix(loop)
    (_, _, cp, _), _ = plant_state_space(loop)
    n = layout.n
    v = np.asarray(d.airspeed, dtype=float)
    af, bf, cf = dryden.shaping_filter(gust_rms, scale_length, v)
    N = n + 2
    A = np.zeros((nb, N, N))
    A[:, :n, :n] = np.broadcast_to(A_cl, (nb, n, n))
    A[:, n:, n:] = af
    B = np.zeros((nb, N))
    B[:, n:] = bf[..., 0]
    a_air, _ = airframes.state_matrices(d)
    a_air = np.broadcast_to(a_air, (nb,) + a_air.shape[-2:])
    start, stop = _block(layout, "airframe")
    gust_column = a_air[:, :, airframes.state_names(d).index("alpha")] / v[:, None]  # per m/s of w_g
    A[:, start:stop, n:] = gust_column[:, :, None] * cf[:, 0, None, :]

    pad = np.zeros((nb, N))
    cp_flat = pad.copy()
    cp_flat[:, :n] = np.broadcast_to(cp[..., 0, :], (nb, n))
    command, surface = _surface_rows(loop, layout, cp_flat, nb)
    cn, dn = airframes.load_factor_row(d)
    load = np.broadcast_to(dn[..., 0, 0], (nb,))[:, None] * surface
    load[:, start:stop] += np.broadcast_to(cn[..., 0, :], (nb, stop - start))
    z_alpha = np.broadcast_to(np.asarray(d.Z_alpha, dtype=float), (nb,))
    load[:, n:] += (-z_alpha / (G0 * v))[:, None] * cf[:, 0, :]
    rows = {"pitch_rate": pad.copy(), "angle_of_attack": pad.copy(), "load_factor": load,
            "surface": surface, "damper_command": command, "gust": pad.copy()}
    rows["pitch_rate"][:, layout.q] = 1.0
    rows["angle_of_attack"][:, layout.alpha] = 1.0
    rows["gust"][:, n:] = cf[:, 0, :]
    return A, B, rows, layout


def _drop_idle_integrators(A, B, rows):
    """Leave out states whose column of ``A`` is zero in every member and that no output
    reads (pure integrators feeding nothing, e.g. the attitude of a longitudinal airframe
    with zero gravity): the other states' covariance does not depend on them."""
    while A.shape[-1]:
        outputs = np.stack(list(rows.values()), 0)
        idle = np.all(A == 0.0, axis=(0, 1)) & np.all(outputs == 0.0, axis=(0, 1)) & np.all(B == 0.0, axis=0)
        if not idle.any():
            break
        keep = ~idle  # leaving one out may leave another feeding nothing: repeat
        A, B, rows = A[:, keep][:, :, keep], B[:, keep], {k: r[:, keep] for k, r in rows.items()}
    return A, B, rows


def gust_model(loop: Loop, gust_rms, scale_length) -> GustModel:
    """Build the loop + spectral-factor state space for a batch, flattened.

    Parameters
    ----------
    loop : Loop
        Batch shape ``S`` (either airframe model; a bare airframe is a loop with no
        hardware and zero gain).
    gust_rms, scale_length : array_like
        sigma_w (m/s) and L_w (m), broadcasting against ``S``.

    Returns
    -------
    GustModel
        Flat over the broadcast batch shape (``np.broadcast_shapes(S, shape(gust_rms),
        shape(scale_length))``, C order).
    """
    shape = np.broadcast_shapes(batch_shape(loop), np.shape(gust_rms), np.shape(scale_length))
    flat = _flat_loop(loop, shape)
    sigma = np.broadcast_to(np.asarray(gust_rms, dtype=float), shape).reshape(-1)
    length = np.broadcast_to(np.asarray(scale_length, dtype=float), shape).reshape(-1)
    A, B, rows, _ = _assemble(flat, sigma, length)
    A, B, rows = _drop_idle_integrators(A, B, rows)
    eig = np.linalg.eigvals(A)
    largest = np.max(eig.real, axis=-1)
    scale = np.max(np.abs(eig), axis=-1)
    stable = largest < -STABILITY_TOLERANCE * np.maximum(scale, 1e-300)
    delay = flat.hardware.delay
    model = f"Pade ({delay.pade_order}, {delay.pade_order}) approximant" if delay is not None else "no delay"
    return GustModel(A, B, rows, stable, largest, model)


def stationary_covariance(model: GustModel):
    """Stationary state covariance ``P`` of a :class:`GustModel`, shape ``(N, n, n)``.

    NaN for members that are not asymptotically stable (no stationary covariance).
    """
    n = model.A.shape[-1]
    A = np.where(model.stable[:, None, None], model.A, -np.eye(n))
    Q = model.B[:, :, None] * model.B[:, None, :]
    P = solve_lyapunov(A, Q)
    P[~model.stable] = np.nan
    return P


# ------------------------------------------------------------------------------------
# rms values and exceedance rates
# ------------------------------------------------------------------------------------


def _rate(model: GustModel, row):
    """Row of the derivative of ``row x`` and a mask of members where it has white noise."""
    return np.einsum("bi,bij->bj", row, model.A), np.einsum("bi,bi->b", row, model.B) != 0.0


def _rms(P, row, unbounded=None):
    with np.errstate(invalid="ignore"):
        out = np.sqrt(np.maximum(quadratic_form(P, row), 0.0))
    return out if unbounded is None else np.where(unbounded, np.nan, out)


def _limit(value, nb):
    if value is None:
        return None
    return np.broadcast_to(np.asarray(value, dtype=float), (nb,))


def _values(model: GustModel, P, rate_limit, authority):
    """rms values, exceedance rates and reasons (flat), before the bare/unstable masks."""
    rows = model.rows
    nb = P.shape[0]
    reasons = {}
    surface_rate, rate_noise = _rate(model, rows["surface"])
    surface_acc, acc_noise = _rate(model, surface_rate)
    command_rate, command_noise = _rate(model, rows["damper_command"])
    out = {
        "rms_pitch_rate_rad_s": _rms(P, rows["pitch_rate"]),
        "rms_load_factor_g": _rms(P, rows["load_factor"]),
        "rms_angle_of_attack_rad": _rms(P, rows["angle_of_attack"]),
        "rms_surface_rad": _rms(P, rows["surface"]),
        "rms_surface_rate_rad_s": _rms(P, surface_rate, rate_noise),
        "rms_damper_command_rad": _rms(P, rows["damper_command"]),
        "rms_damper_command_rate_rad_s": _rms(P, command_rate, command_noise),
    }
    reasons["rms_surface_rate_rad_s"] = np.where(rate_noise, REASON_RATE_UNBOUNDED, "")
    reasons["rms_damper_command_rate_rad_s"] = np.where(command_noise, REASON_COMMAND_RATE_UNBOUNDED, "")

    limit = _limit(rate_limit, nb)
    if limit is None:
        out["rate_limit_exceedances_per_s"] = np.full(nb, np.nan)
        reasons["rate_limit_exceedances_per_s"] = np.full(nb, REASON_NO_RATE_LIMIT)
    else:
        sigma_acc = _rms(P, surface_acc, acc_noise | rate_noise)
        rate = crossing_rate(out["rms_surface_rate_rad_s"], sigma_acc, limit)
        unbounded = (acc_noise | rate_noise) & (out["rms_surface_rate_rad_s"] > 0.0)
        out["rate_limit_exceedances_per_s"] = np.where(unbounded, np.nan, rate)
        reasons["rate_limit_exceedances_per_s"] = np.where(unbounded, REASON_RATE_CROSSINGS_UNBOUNDED, "")

    limit = _limit(authority, nb)
    if limit is None:
        out["authority_exceedances_per_s"] = np.full(nb, np.nan)
        reasons["authority_exceedances_per_s"] = np.full(nb, REASON_NO_AUTHORITY)
    else:
        sigma_cmd = out["rms_damper_command_rad"]
        unbounded = command_noise & (sigma_cmd > 0.0)
        rate = crossing_rate(sigma_cmd, out["rms_damper_command_rate_rad_s"], limit)
        out["authority_exceedances_per_s"] = np.where(unbounded, np.nan, rate)
        reasons["authority_exceedances_per_s"] = np.where(unbounded, REASON_COMMAND_RATE_UNBOUNDED, "")
    return out, reasons


def _result(model, values, reasons, sigma, length, shape, bare):
    """Apply the bare-airframe and stability masks, reshape to the batch shape.

    A NaN value's reason is, first applicable: the bare airframe has no damper (damper
    fields); the loop is not stable; the field's own reason (missing limit, unbounded).
    """
    nb = model.stable.shape[0]
    unstable = ~model.stable
    why_unstable = REASON_UNSTABLE_BARE if bare else REASON_UNSTABLE
    out, texts = {}, {}
    for name in _RMS_FIELDS:
        text = np.asarray(reasons.get(name, np.full(nb, "")), dtype=object).copy()
        value = np.where(unstable, np.nan, values[name])
        text[unstable] = why_unstable
        if bare and name in DAMPER_FIELDS:
            value = np.full(nb, np.nan)
            text[:] = REASON_BARE
        out[name] = value.reshape(shape)
        texts[name] = np.where(np.isnan(value), text, "").astype(str).reshape(shape)
    return TurbulenceResult(
        gust_rms_m_s=sigma.reshape(shape),
        scale_length_m=length.reshape(shape),
        **out,
        stable=model.stable.reshape(shape),
        reasons=texts,
        delay_model=model.delay_model,
        bare=bare,
    )


def turbulence_response(loop: Loop, gust_rms, scale_length, *, rate_limit=None, authority=None, bare=False):
    """Stationary rms response of a batch of loops to Dryden vertical turbulence.

    Parameters
    ----------
    loop : Loop
        Batch shape ``S``; either airframe model, either sign of ``M_delta``. For the bare
        airframe pass ``bare=True`` (the hardware and gain are then not used).
    gust_rms : array_like
        rms vertical gust velocity sigma_w, m/s, broadcasting against ``S``.
    scale_length : array_like
        Dryden vertical scale length L_w, m, broadcasting against ``S``.
    rate_limit : float or array_like, optional
        Actuator rate limit, rad/s (> 0): the surface-rate level of
        ``rate_limit_exceedances_per_s``; None gives NaN with a reason.
    authority : float or array_like, optional
        The damper's authority, rad (> 0): the damper-command level of
        ``authority_exceedances_per_s``; None gives NaN with a reason.
    bare : bool
        Analyse the airframe alone (damper fields NaN with a reason).

    Returns
    -------
    TurbulenceResult
        Arrays of the broadcast batch shape.
    """
    shape = np.broadcast_shapes(batch_shape(loop), np.shape(gust_rms), np.shape(scale_length))
    if bare:
        loop = Loop(loop.airframe, Hardware(), np.zeros(shape))
    model = gust_model(loop, gust_rms, scale_length)
    P = stationary_covariance(model)
    values, reasons = _values(model, P, rate_limit, authority)
    sigma = np.broadcast_to(np.asarray(gust_rms, dtype=float), shape).reshape(-1)
    length = np.broadcast_to(np.asarray(scale_length, dtype=float), shape).reshape(-1)
    return _result(model, values, reasons, sigma, length, shape, bare)


def turbulence_study(loop: Loop, gust_rms, scale_length, *, rate_limit=None, authority=None) -> TurbulenceStudy:
    """Bare and augmented responses to the same turbulence (:func:`turbulence_response`).

    The bare result has the batch shape of the augmented one (the gain axis is kept so
    that both broadcast alike).
    """
    closed = turbulence_response(loop, gust_rms, scale_length, rate_limit=rate_limit, authority=authority)
    bare = turbulence_response(loop, gust_rms, scale_length, rate_limit=rate_limit, authority=authority, bare=True)
    return TurbulenceStudy(bare=bare, closed_loop=closed)


def turbulence_for_spec(loop: Loop, spec: dryden.TurbulenceSpec, height=None, **limits) -> TurbulenceStudy:
    """:func:`turbulence_study` with the intensity and scale length of a
    :class:`~damper.model.dryden.TurbulenceSpec` at each condition's height above ground
    (m, broadcasting against the loop's batch; not needed for an explicit spec)."""
    gust_rms, scale_length = spec.at(height)
    return turbulence_study(loop, gust_rms, scale_length, **limits)
