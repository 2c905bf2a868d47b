"""Current limit and regulation law at the limiter-transistor base.

The current-limit transistor ends the on-time when the voltage at its base
reaches its base-emitter voltage.  The sense resistor and the regulation
path (zener from the rectified feedback winding, or an optocoupler) both
feed that base; see ``notes/circuit.md``.
"""

from __future__ import annotations

import numpy as np

from rcc.devices import base_emitter_voltage, zener_voltage

__all__ = [
    "LIMITER_REVERSE_GAIN",
    "current_limit",
    "feedback_winding_regulation_current",
    "optocoupler_regulation_current",
    "regulation_current",
    "trip_current",
    "auxiliary_voltage",
]

#: Inverse (reverse-active) current gain of the limiter transistor, the value
#: of the circuit definition (notes/circuit.md) shared by the engine and the
#: cycle model: while the feedback winding pulls the switch base below ground
#: the limiter conducts in inverse mode and the base node draws
#: (1 + beta_R) times the limiter's base current (Ebers & Moll, Proc. IRE 42,
#: 1954).  Small-signal NPN transistors have beta_R of about 0.5-5  # from memory
LIMITER_REVERSE_GAIN = 1.0


def _as(x):
    return np.asarray(x, dtype=float)


def current_limit(vbe_reference, tempco, temperature, sense_resistance):
    """Primary current at which the limiter transistor turns on.

    Parameters
    ----------
    vbe_reference : float or array_like
        Limiter base-emitter voltage at 25 degC [V].
    tempco : float or array_like
        Its temperature coefficient [V/K].
    temperature : float or array_like
        Temperature [K].
    sense_resistance : float or array_like
        Emitter sense resistor [ohm].

    Returns
    -------
    ndarray
        Current-limit threshold [A].

    Notes
    -----
    ``I_lim = Vbe(T) / Rs``, about 0.6 V over the sense resistor; it falls
    with temperature at about -2 mV/K  # common practice
    """
    return base_emitter_voltage(vbe_reference, tempco, temperature) / _as(sense_resistance)


def auxiliary_voltage(output_voltage, output_rectifier_drop, feedback_turns,
                      output_turns, auxiliary_rectifier_drop):
    """Voltage of the rectified feedback winding (primary-side sensing).

    Parameters
    ----------
    output_voltage : float or array_like
        Output voltage [V].
    output_rectifier_drop : float or array_like
        Output rectifier drop [V].
    feedback_turns : float or array_like
        Feedback winding turns [1].
    output_turns : float or array_like
        Output winding turns [1].
    auxiliary_rectifier_drop : float or array_like
        Drop of the rectifier on the feedback winding [V].

    Returns
    -------
    ndarray
        Filter-capacitor voltage [V].

    Notes
    -----
    During the flyback plateau all windings carry the same volts per turn:
    ``V_aux = (Nf/Ns)(Vo + Vf) - V_d``  # common practice
    (peak-rectified plateau; the leakage spike's peak charging is neglected).
    """
    return (_as(feedback_turns) / _as(output_turns)
            * (_as(output_voltage) + _as(output_rectifier_drop))
            - _as(auxiliary_rectifier_drop))


def feedback_winding_regulation_current(auxiliary, zener, limiter_vbe, series_resistance):
    """Current the zener path injects into the limiter base.

    Parameters
    ----------
    auxiliary : float or array_like
        Rectified feedback-winding voltage [V].
    zener : float or array_like
        Zener voltage [V].
    limiter_vbe : float or array_like
        Limiter base-emitter voltage [V].
    series_resistance : float or array_like
        Resistor in series with the zener [ohm].

    Returns
    -------
    ndarray
        Injected current, zero below the zener knee [A].

    Notes
    -----
    Ideal zener (sharp knee): ``I = max(0, (V_aux - Vz - Vbe) / R)``  # common practice
    """
    return np.maximum(0.0, (_as(auxiliary) - _as(zener) - _as(limiter_vbe))
                      / _as(series_resistance))


def optocoupler_regulation_current(output_voltage, reference, led_drop, series_resistance,
                                   ctr):
    """Phototransistor current injected into the limiter base.

    Parameters
    ----------
    output_voltage : float or array_like
        Output voltage [V].
    reference : float or array_like
        Secondary reference voltage [V].
    led_drop : float or array_like
        LED forward drop [V].
    series_resistance : float or array_like
        LED series resistor [ohm].
    ctr : float or array_like
        Current transfer ratio [1].

    Returns
    -------
    ndarray
        Injected current [A].

    Notes
    -----
    ``I = CTR max(0, (Vo - Vref - V_LED) / R)`` (ideal reference, linear
    CTR)  # common practice
    """
    return _as(ctr) * np.maximum(
        0.0, (_as(output_voltage) - _as(reference) - _as(led_drop)) / _as(series_resistance))


def regulation_current(design, output_voltage, temperature):
    """Regulation current into the limiter base for a design.

    Parameters
    ----------
    design : rcc.design.Design
        The design.
    output_voltage : float or array_like
        Output voltage [V].
    temperature : float or array_like
        Temperature [K].

    Returns
    -------
    ndarray
        Injected current [A] (zero for ``method = "none"``).

    Notes
    -----
    Dispatches on ``regulation.method`` to
    :func:`feedback_winding_regulation_current` or
    :func:`optocoupler_regulation_current`; see ``notes/circuit.md``.
    """
    regulation = design.regulation
    output_voltage = _as(output_voltage)
    vbe = base_emitter_voltage(design.limiter.vbe, design.limiter.vbe_tempco, temperature)
    if regulation.method == "feedback-winding":
        aux = auxiliary_voltage(output_voltage, design.output.rectifier_drop,
                                design.transformer.feedback_turns,
                                design.transformer.output_turns, regulation.rectifier_drop)
        zener = zener_voltage(regulation.zener_voltage, regulation.zener_tempco, temperature)
        return feedback_winding_regulation_current(aux, zener, vbe,
                                                   regulation.series_resistance)
    if regulation.method == "optocoupler":
        return optocoupler_regulation_current(output_voltage, regulation.reference_voltage,
                                              regulation.led_drop,
                                              regulation.series_resistance, regulation.ctr)
    return np.zeros(np.broadcast(output_voltage, _as(temperature)).shape)


def trip_current(limiter_vbe, injected_current, base_resistance, sense_resistance):
    """Primary current at which the limiter ends the on-time.

    Parameters
    ----------
    limiter_vbe : float or array_like
        Limiter base-emitter voltage [V].
    injected_current : float or array_like
        Regulation current into the limiter base [A].
    base_resistance : float or array_like
        Resistor from the sense resistor to the limiter base [ohm].
    sense_resistance : float or array_like
        Sense resistor [ohm].

    Returns
    -------
    ndarray
        Trip current [A], zero when the regulation current alone turns the
        limiter on.

    Notes
    -----
    Superposition at the limiter base (sense resistor much smaller than the
    base resistor, limiter base current neglected):
    ``Vbe = I Rs + I_reg R_lb``  ->  ``I = (Vbe - I_reg R_lb) / Rs``  # common practice
    """
    return np.maximum(0.0, (_as(limiter_vbe) - _as(injected_current) * _as(base_resistance))
                      / _as(sense_resistance))
