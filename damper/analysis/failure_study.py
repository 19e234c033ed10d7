"""The failure study of a design: every failure kind and the authority window, per condition.

:func:`study_failures` runs what :class:`damper.analysis.failure_spec.FailureSpec` asks
for and returns a :class:`FailureStudy` whose :meth:`FailureStudy.record` and
:meth:`FailureStudy.summary_record` are the JSON contract of design.json (plain Python
values, NaN and infinity as None):

per condition ``failures``: ``{recognition_time_s, authority_rad, hardover: {...},
oscillatory: {...}, passive: {level, met}, authority_window_rad: [lower, upper] or null,
authority_window_reason}``; at top level ``failures.authority_window_rad`` (the
intersection) with its reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..model.batch import batch_shape
from ..model.loop import Loop
from . import authority as au
from . import failures as fl
from .failure_spec import FailureSpec, ServoLimits


@dataclass(frozen=True)
class FailureStudy:
    """Every failure result of a batch of conditions (arrays of the conditions' shape).

    Attributes
    ----------
    spec : FailureSpec
    authority_rad : ndarray
        The authority the failures run to, rad (the damper's, else the actuator's travel).
    hardover, oscillatory : TransientResult or None
        None when not studied.
    passive : PassiveResult or None
    window : AuthorityWindow or None
        None without the responses' lower edge (no ``required`` given).
    common : CommonWindow or None
        The intersection over the conditions.
    """

    spec: FailureSpec
    authority_rad: np.ndarray
    hardover: fl.TransientResult | None
    oscillatory: fl.TransientResult | None
    passive: fl.PassiveResult | None
    window: au.AuthorityWindow | None
    common: au.CommonWindow | None

    @property
    def met(self) -> np.ndarray:
        """Per condition: every studied failure meets its limits, the passive level is kept
        (when judged) and the authority window is not empty (when computed)."""
        ok = np.ones(np.shape(self.authority_rad), bool)
        for res in (self.hardover, self.oscillatory):
            if res is not None:
                ok &= np.asarray(res.met)
        if self.passive is not None and self.passive.met is not None:
            ok &= np.asarray(self.passive.met)
        if self.window is not None:
            ok &= ~np.asarray(self.window.empty)
        return ok

    def record(self, index) -> dict:
        """The JSON contract of condition `index` (batch index tuple or int)."""
        out = {"recognition_time_s": self.spec.recognition_time_s, "authority_rad": _num(self.authority_rad[index])}
        if self.hardover is not None:
            out["hardover"] = _transient_record(self.hardover, index, with_sign=True)
        if self.oscillatory is not None:
            out["oscillatory"] = {"frequency_rad_s": _num(self.oscillatory.frequency_rad_s[index]),
                                  **_transient_record(self.oscillatory, index, with_sign=False)}
        if self.passive is not None:
            p = self.passive
            out["passive"] = {
                "level": None if p.level is None else int(np.asarray(p.level)[index]),
                "met": None if p.met is None else bool(np.asarray(p.met)[index]),
                "level_required": p.required,
                "levels": None if p.levels is None else {k: int(np.asarray(v)[index]) for k, v in p.levels.items()},
            }
        if self.window is not None:
            w = self.window.window(index)
            out["authority_window_rad"] = None if w is None else [_num(x) for x in w]
            out["authority_window_reason"] = self.window.reason(index)
        return out

    def summary_record(self) -> dict:
        """The top-level ``failures`` entry: the common window and its reason."""
        if self.common is None:
            return {"authority_window_rad": None, "authority_window_reason": "not computed"}
        w = self.common.window_rad
        return {"authority_window_rad": None if w is None else [_num(x) for x in w],
                "authority_window_reason": self.common.reason}


def _num(x):
    x = float(x)
    return x if math.isfinite(x) else None


def _transient_record(res: fl.TransientResult, index, with_sign) -> dict:
    out = {
        "peak_load_factor_increment_g": _num(res.peak_load_factor_increment_g[index]),
        "peak_pitch_rate_rad_s": _num(res.peak_pitch_rate_rad_s[index]),
        "peak_pitch_attitude_change_rad": _num(res.peak_pitch_attitude_change_rad[index]),
        "peak_angle_of_attack_change_rad": _num(res.peak_angle_of_attack_change_rad[index]),
    }
    if with_sign:
        out["sign"] = int(res.sign[index])
    out["met"] = bool(res.met[index])
    out["limits_met"] = {k: bool(np.asarray(v)[index]) for k, v in res.limits_met.items()}
    out["slack"] = {k: _num(np.asarray(v)[index]) for k, v in res.slack.items()}
    out["binding_limit"] = str(res.binding_limit[index])
    if res.frequency_at_range_edge is not None:
        out["frequency_at_range_edge"] = bool(res.frequency_at_range_edge[index])
    return out


def study_failures(loop: Loop, servo: ServoLimits, spec: FailureSpec | None = None, *, requirements=None, w=None,
                   required: au.RequiredAuthority | None = None, names=None) -> FailureStudy:
    """Run the failure study of `spec` (default :class:`FailureSpec`) at every condition.

    Parameters
    ----------
    loop : Loop
        The design's loop at its chosen gains, batch shape ``S`` (conditions). The
        hardover and oscillatory failures use its airframe and actuator; the passive
        failure its whole hardware at K = 0.
    servo : ServoLimits
    requirements : Requirements or None
        The case's requirements (passive level and criteria).
    w : ndarray or None
        The case's frequency grid for the margins, rad/s.
    required : RequiredAuthority or None
        The window's lower edge (:func:`damper.analysis.authority.required_authority`);
        without it no window is computed.
    names : sequence of str or None
        Condition labels (flat order) for the common window's reason.
    """
    spec = spec or FailureSpec()
    shape = batch_shape(loop)
    authority = np.broadcast_to(servo.failure_authority(), shape)
    hard = fl.hardover(loop, servo, spec) if "hardover" in spec.kinds else None
    osc = fl.oscillatory(loop, servo, spec) if "oscillatory" in spec.kinds else None
    pas = fl.passive(loop, spec, requirements, w) if "passive" in spec.kinds else None
    window = common = None
    if required is not None:
        upper = au.largest_safe_authority(loop, servo, spec, oscillatory_reference=osc)
        window = au.authority_window(required, upper)
        common = au.intersect(window, names)
    return FailureStudy(spec, authority, hard, osc, pas, window, common)
