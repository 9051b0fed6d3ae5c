"""Motor load from field measurements: input power from volts, amps and power factor, and load by the
input-power, slip and current methods.

Scope: the screening formulas practitioners use to estimate how loaded an installed three-phase
motor is from a few readings (US DOE Motor Challenge fact sheet "Determining Electric Motor Load and
Efficiency", DOE/GO-10097-517). All functions are elementwise, broadcast, and return the kind they
were given. For a calibrated estimate of shaft power from measured input power use
:func:`models.induction.shaft_from_input_kw`, which accounts for the motor's own losses.
"""

from __future__ import annotations

import numpy as np

from models.induction import _require, _unwrap

#: sqrt(3), the line-to-phase factor of a balanced three-phase system [-].
SQRT3 = 3.0**0.5


def _positive(x, name: str) -> None:
    a, _, _ = _unwrap(x)
    _require(np.isfinite(a) & (a > 0), f"{name} must be positive")


def three_phase_input_kw(v_ll_v, i_a, power_factor):
    """Active input power of a balanced three-phase load from line voltage, current and power factor.

    Parameters
    ----------
    v_ll_v : float or array_like
        Line-to-line RMS voltage [V], > 0 (average of the three phases).
    i_a : float or array_like
        Line RMS current [A], >= 0 (average of the three phases).
    power_factor : float or array_like
        Power factor [-], in (0, 1].

    Returns
    -------
    float or array_like
        P = sqrt(3) V I PF / 1000 [kW].

    Raises
    ------
    ValueError
        On non-positive voltage, negative current or power factor outside (0, 1].

    Notes
    -----
    Eq. 1 of [1], with V and I the averages of the three phases. A true-RMS power meter is better where
    the current is distorted (drives).

    References
    ----------
    .. [1] US Department of Energy, "Determining Electric Motor Load and Efficiency," Motor Challenge
       fact sheet DOE/GO-10097-517, 1997, Eq. 1.

    Examples
    --------
    >>> round(three_phase_input_kw(400.0, 30.0, 0.85), 4)
    17.6669
    """
    _positive(v_ll_v, "v_ll_v")
    i, _, _ = _unwrap(i_a)
    pf, _, _ = _unwrap(power_factor)
    _require(~(i < 0), "i_a must not be negative")
    _require((pf > 0) & (pf <= 1), "power_factor must lie in (0, 1]")
    return SQRT3 * v_ll_v * i_a * power_factor / 1000.0


def rated_input_kw(rated_p_kw, rated_efficiency_frac):
    """Input power at full rated load, P_ir = P_rated / eta_fl.

    Parameters
    ----------
    rated_p_kw : float or array_like
        Rated shaft power [kW], > 0 (convert hp at the boundary: 1 hp = 0.745699872 kW).
    rated_efficiency_frac : float or array_like
        Full-load efficiency [-], in (0, 1).

    Returns
    -------
    float or array_like
        Rated input power [kW].

    Notes
    -----
    Eq. 2 of the DOE fact sheet DOE/GO-10097-517 (there written hp x 0.7457 / eta_fl).

    Examples
    --------
    >>> round(rated_input_kw(15.0, 0.921), 4)
    16.2866
    """
    _positive(rated_p_kw, "rated_p_kw")
    eta, _, _ = _unwrap(rated_efficiency_frac)
    _require((eta > 0) & (eta < 1), "rated_efficiency_frac must lie in (0, 1)")
    return rated_p_kw / rated_efficiency_frac


def load_frac_from_input(p_in_kw, rated_p_kw, rated_efficiency_frac):
    """Motor load estimated from measured input power (input-power method).

    Parameters
    ----------
    p_in_kw : float or array_like
        Measured input power [kW], >= 0.
    rated_p_kw : float or array_like
        Rated shaft power [kW], > 0.
    rated_efficiency_frac : float or array_like
        Full-load efficiency [-], in (0, 1).

    Returns
    -------
    float or array_like
        Load = P_i / P_ir [-] (1.0 = rated input power).

    Notes
    -----
    Eq. 3 of the DOE fact sheet DOE/GO-10097-517 (there in %). It is a ratio of input powers, so it
    reads high at light load, where the constant losses are a larger share of the input; the
    model-based :func:`models.induction.shaft_from_input_kw` removes that bias.

    Examples
    --------
    >>> round(load_frac_from_input(12.0, 15.0, 0.921), 4)
    0.7368
    """
    p, _, _ = _unwrap(p_in_kw)
    _require(~(p < 0), "p_in_kw must not be negative")
    return p_in_kw / rated_input_kw(rated_p_kw, rated_efficiency_frac)


def load_frac_from_slip(speed_rpm, sync_speed_rpm, rated_speed_rpm, v_ll_v=None, rated_v_ll_v=None):
    """Motor load estimated from measured speed (slip method), optionally voltage-compensated.

    Parameters
    ----------
    speed_rpm : float or array_like
        Measured shaft speed [rpm], 0 < n <= sync speed.
    sync_speed_rpm : float or array_like
        Synchronous speed [rpm], > 0 (120 f / poles).
    rated_speed_rpm : float or array_like
        Nameplate full-load speed [rpm], below the synchronous speed.
    v_ll_v : float or array_like, optional
        Measured line voltage [V], > 0. Give it together with ``rated_v_ll_v`` to compensate.
    rated_v_ll_v : float or array_like, optional
        Nameplate voltage [V], > 0.

    Returns
    -------
    float or array_like
        Load = (n_s - n) / [(n_s - n_r) (V_r/V)^2] [-]; without voltages the factor is 1.

    Raises
    ------
    ValueError
        On a measured speed above synchronous (the machine would be generating), a rated speed not
        below synchronous, or only one of the two voltages.

    Notes
    -----
    Slip method of the DOE fact sheet DOE/GO-10097-517 [1]. Slip at a given torque varies inversely
    with the square of the voltage, hence the (V_r/V)^2 compensation. The nameplate speed is rounded
    and may deviate by +-20 % of rated slip (IEC 60034-1:2017, Table 21), which limits the accuracy of
    this method; use it for screening.

    References
    ----------
    .. [1] US Department of Energy, "Determining Electric Motor Load and Efficiency," Motor Challenge
       fact sheet DOE/GO-10097-517, 1997, slip method.

    Examples
    --------
    A 4-pole 50 Hz motor rated 1460 rpm measured at 1480 rpm:

    >>> load_frac_from_slip(1480.0, 1500.0, 1460.0)
    0.5
    """
    n, _, _ = _unwrap(speed_rpm)
    n_s, _, _ = _unwrap(sync_speed_rpm)
    n_r, _, _ = _unwrap(rated_speed_rpm)
    _require(n_s > 0, "sync_speed_rpm must be positive")
    _require(n_r < n_s, "rated_speed_rpm must be below sync_speed_rpm")
    _require(n > 0, "speed_rpm must be positive")
    _require(~(n > n_s), "speed_rpm above synchronous speed means the machine is generating; check the poles and frequency")
    if (v_ll_v is None) != (rated_v_ll_v is None):
        raise ValueError("give both v_ll_v and rated_v_ll_v for voltage compensation, or neither.")
    correction = 1.0
    if v_ll_v is not None:
        _positive(v_ll_v, "v_ll_v")
        _positive(rated_v_ll_v, "rated_v_ll_v")
        correction = (rated_v_ll_v / v_ll_v) ** 2
    return (sync_speed_rpm - speed_rpm) / ((sync_speed_rpm - rated_speed_rpm) * correction)


def load_frac_from_current(i_a, rated_i_a, v_ll_v, rated_v_ll_v):
    """Motor load estimated from measured current (amperage method), for screening only.

    Parameters
    ----------
    i_a : float or array_like
        Measured line current [A], >= 0.
    rated_i_a : float or array_like
        Nameplate full-load current [A], > 0.
    v_ll_v : float or array_like
        Measured line voltage [V], > 0.
    rated_v_ll_v : float or array_like
        Nameplate voltage [V], > 0.

    Returns
    -------
    float or array_like
        Load ~ (I / I_r)(V / V_r) [-].

    Warnings
    --------
    The current of a lightly loaded motor is mostly magnetising current, so this overstates load below
    about 50 % (formula as commonly quoted with the DOE fact sheet DOE/GO-10097-517; exact wording not
    verified). Prefer the input-power or slip method.

    Examples
    --------
    >>> round(load_frac_from_current(20.0, 28.0, 400.0, 400.0), 4)
    0.7143
    """
    i, _, _ = _unwrap(i_a)
    _require(~(i < 0), "i_a must not be negative")
    _positive(rated_i_a, "rated_i_a")
    _positive(v_ll_v, "v_ll_v")
    _positive(rated_v_ll_v, "rated_v_ll_v")
    return (i_a / rated_i_a) * (v_ll_v / rated_v_ll_v)
