"""Every figure simkit reports, declared once: name, unit, meaning and the analysis that makes it.

The run's figures (``metrics`` of ``run --json``, one number each) and the per-part quantities
(``parts`` of ``run --json``) are both named here; the pipeline computes them, the checks, the
reports, the sweeps and the user reference read this table.  A figure's name ends with its unit.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Figure:
    """One reported quantity."""

    name: str  # as in run --json; ends with its unit
    unit: str  # "V", "A", "W", "s", "h", "Hz", "VA", "A2s", "F", "H", "ohm", "%", "dB", "dBV", "dBuV", or ""
    meaning: str
    analysis: str = "steady state"  # which run makes it
    words: str = ""  # a short name for axis labels and legends ("output voltage"); the meaning when empty


def _table(*figures: Figure) -> dict[str, Figure]:
    return {f.name: f for f in figures}


_S, _ON, _BAT, _KEY, _REG = "steady state", "switch-on", "battery", "steady keying", "regulator"
_HF = "high-frequency"

#: The run's figures, in the order tables print them.
FIGURES: dict[str, Figure] = _table(
    Figure("vout_dc_v", "V", "mean output voltage across the load", words="output voltage"),
    Figure("ripple_pp_v", "V", "peak-to-peak output ripple", words="output ripple, peak to peak"),
    Figure("ripple_rms_v", "V", "RMS of the output's AC part", words="output ripple, RMS"),
    Figure("iout_dc_a", "A", "mean load current", words="load current"),
    Figure("diode_peak_a", "A", "highest repetitive peak current in any rectifier diode", words="diode peak current"),
    Figure("diode_avg_a", "A", "highest mean current of any rectifier diode", words="diode mean current"),
    Figure("diode_rms_a", "A", "highest RMS current of any rectifier diode", words="diode RMS current"),
    Figure("diode_piv_v", "V", "highest reverse voltage across any rectifier diode",
           words="diode peak reverse voltage"),
    Figure("surge_peak_a", "A", "highest diode current after switch-on with empty capacitors", _ON,
           words="switch-on diode current"),
    Figure("cap_peak_v", "V", "highest voltage across any capacitor, switch-on included", _ON,
           words="highest capacitor voltage"),
    Figure("reservoir_ripple_a", "A", "RMS ripple current of the reservoir (highest stage) capacitor",
           words="reservoir ripple current"),
    Figure("source_rms_a", "A", "RMS winding current (each half for centre-tap)", words="winding current, RMS"),
    Figure("source_va", "VA", "apparent power drawn from the winding(s)", words="winding apparent power"),
    Figure("settle_time_s", "s", "simulated time until steady state was declared (every span of the search)",
           words="time to steady state"),
    # The whole transformer (kind = "transformer": the high-voltage winding and its heater windings).
    Figure("primary_rms_a", "A", "RMS primary current: every winding's current times its turns ratio, summed in "
           "time (magnetising current not included)", words="primary current, RMS"),
    Figure("transformer_va", "VA", "every winding's rated voltage times its RMS current, summed (high-voltage "
           "winding and heater windings)", words="transformer apparent power"),
    # Start-up run (every design; the warm-up figures only when a load has a warmup).
    Figure("rise_time_s", "s", "from switch-on until the output first reaches 90 % of vout_dc_v", _ON,
           words="rise time"),
    Figure("cap_peak_warmup_v", "V", "highest capacitor voltage before the loads draw current (heaters warming)",
           _ON),
    Figure("vout_warmup_v", "V", "highest output voltage before the loads draw current", _ON),
    # Battery and inverter (with a [battery]).
    Figure("battery_current_a", "A", "mean battery current in steady state", _BAT, words="battery current"),
    Figure("battery_rms_a", "A", "RMS battery current in steady state (what the battery lead's fuse and wiring carry)",
           _BAT, words="battery RMS current"),
    Figure("battery_peak_current_a", "A", "highest instantaneous battery current: in steady state, and in steady "
           "keying when the load is keyed", _BAT, words="battery peak current"),
    Figure("battery_voltage_v", "V", "mean battery terminal voltage under load", _BAT, words="battery voltage"),
    Figure("input_power_w", "W", "mean power drawn from the battery", _BAT, words="battery power"),
    Figure("output_power_w", "W", "mean power the inverter delivers (any inverter, with or without [battery])", _BAT,
           words="inverter output power"),
    Figure("efficiency", "", "output_power_w / input_power_w", _BAT, words="efficiency"),
    Figure("runtime_h", "h", "hours until the usable capacity is used at the steady-state current, by Peukert's law "
           "(battery.peukert)", _BAT, words="run time"),
    # An inverter's output (kind "inverter").
    Figure("inverter_switch_on_power_w", "W", "highest mean power the inverter delivers over one period after "
           "switch-on (charging empty capacitors)", _ON, words="inverter switch-on power"),
    # Steady keying (a keyed load; the first one when there are several).
    Figure("vout_keydown_v", "V", "mean output over the key-down intervals of a keying cycle", _KEY,
           words="key-down output voltage"),
    Figure("vout_keyup_v", "V", "mean output over the key-up intervals of a keying cycle", _KEY,
           words="key-up output voltage"),
    Figure("sag_v", "V", "vout_keyup_v - vout_keydown_v", _KEY, words="sag"),
    Figure("sag_pct", "%", "sag_v as a percentage of vout_keyup_v", _KEY, words="sag"),
    Figure("recovery_time_s", "s", "from the longest key-down's edge (a stepped load: its largest rise) until the "
           "output's one-period mean stays within settle_band (2 %) of the step around where it ends", _KEY,
           words="recovery time"),
    Figure("overshoot_v", "V", "rise of the output's one-period mean after the key-up edge above where it ends "
           "that key-up interval", _KEY, words="overshoot"),
    Figure("ripple_keydown_pp_v", "V", "output ripple over the last period of the longest key-down interval (at "
           "the measuring step)", _KEY),
    Figure("droop_v", "V", "fall of the output's one-period mean from the start to the end of the longest key-down",
           _KEY),
    Figure("keying_cycle_s", "s", "length of one keying cycle (one repetition of the Morse text)", _KEY),
    Figure("chirp_hz", "Hz", "pushing_hz_per_v x the change of the one-period mean at the oscillator's node within "
           "a dot (edges left out)", _KEY, words="chirp"),
    Figure("battery_keydown_current_a", "A", "mean battery current with the key held down until everything settled "
           "(what fuse and wiring carry)", _KEY, words="battery current, key down"),
    Figure("battery_keyup_current_a", "A", "battery current at the end of the longest key-up interval (one-period "
           "mean)", _KEY, words="battery current, key up"),
    Figure("battery_keyed_current_a", "A", "mean battery current over a keying cycle", _KEY,
           words="battery current while keying"),
    Figure("runtime_keyed_h", "h", "hours until the usable capacity is used while keying, by Peukert's law on the "
           "current as it varies", _KEY, words="run time while keying"),
    # Regulator (with a [regulator]).
    Figure("reg_vin_v", "V", "mean regulator input (the filter's output)", _REG, words="regulator input voltage"),
    Figure("reg_vin_min_v", "V", "lowest regulator input over the analysed span (steady state and keying): the "
           "trough a series regulator must stay above", _REG, words="regulator input trough"),
    Figure("reg_vout_v", "V", "mean regulated output", _REG, words="regulated output voltage"),
    Figure("reg_headroom_min_v", "V", "lowest input minus output over the analysed span (steady state and keying)",
           _REG, words="regulator headroom"),
    Figure("reg_dissipation_w", "W", "mean dissipation of the pass device or shunt element", _REG,
           words="regulator dissipation"),
    Figure("reg_dissipation_peak_w", "W", "highest dissipation of the pass device or shunt element", _REG),
    Figure("shunt_current_min_a", "A", "lowest shunt current over the analysed span", _REG),
    Figure("shunt_current_max_a", "A", "highest shunt current over the analysed span", _REG),
    Figure("load_regulation_pct", "%", "output change from the light load to the design load, % of the output",
           _REG, words="load regulation"),
    Figure("line_regulation_pct", "%", "output change over the mains range (+- tolerance, or +-10 %), % of the "
           "output", _REG, words="line regulation"),
    Figure("line_input_change_pct", "%", "the regulator input's change over the same range, for comparison", _REG),
    Figure("ripple_rejection_db", "dB", "20 log10 of input ripple over output ripple (peak-to-peak)", _REG,
           words="ripple rejection"),
    # Hum: the largest of the first ten harmonics of the source frequency in the output (every run).
    Figure("hum_dbv", "dBV", "level of the output's largest hum harmonic, dB re 1 V RMS", words="hum level"),
    Figure("hum_frequency_hz", "Hz", "frequency of that harmonic", words="hum frequency"),
    Figure("hum_keydown_dbv", "dBV", "the same over the last whole period of the longest key-down", _KEY,
           words="key-down hum level"),
    Figure("hum_keydown_frequency_hz", "Hz", "frequency of that harmonic", _KEY),
    Figure("battery_hum_a", "A", "RMS of the battery current's largest harmonic of the source frequency", _BAT,
           words="battery current hum"),
    Figure("battery_hum_frequency_hz", "Hz", "frequency of that harmonic", _BAT),
    # Hash: the high-frequency analysis (run --hash, simkit hash, [simulation] hash).
    Figure("hash_rms_v", "V", "RMS of the output's content above simulation.hash_band, with the diodes' real "
           "turn-off", _HF, words="hash at the output"),
    Figure("hash_dbuv", "dBuV", "hash_rms_v in dB re 1 uV RMS", _HF, words="hash level"),
)

#: Per-part quantities (``parts`` of ``run --json``): each part holds the ones that apply to it.
PART_FIGURES: dict[str, Figure] = _table(
    Figure("peak_a", "A", "highest current"),
    Figure("avg_a", "A", "mean current"),
    Figure("rms_a", "A", "RMS current"),
    Figure("dc_a", "A", "mean current"),
    Figure("piv_v", "V", "highest reverse voltage"),
    Figure("surge_peak_a", "A", "highest current after switch-on", _ON),
    Figure("surge_i2t_a2s", "A2s", "I2t over the half period around the switch-on peak", _ON),
    Figure("switch_on_piv_v", "V", "highest reverse voltage during switch-on", _ON),
    Figure("value_f", "F", "capacitance"),
    Figure("value_h", "H", "inductance"),
    Figure("value_ohm", "ohm", "resistance"),
    Figure("peak_v", "V", "highest voltage (switch-on included)"),
    Figure("dc_v", "V", "mean voltage"),
    Figure("ripple_pp_v", "V", "peak-to-peak voltage ripple"),
    Figure("ripple_rms_a", "A", "RMS ripple current"),
    Figure("switch_on_peak_v", "V", "highest voltage during switch-on", _ON),
    Figure("switch_on_peak_a", "A", "highest current during switch-on", _ON),
    Figure("esr_dissipation_w", "W", "dissipation in the ESR"),
    Figure("dcr_dissipation_w", "W", "dissipation in the winding resistance"),
    Figure("dissipation_w", "W", "mean dissipation"),
    Figure("dissipation_peak_w", "W", "highest dissipation"),
    Figure("switch_on_dissipation_peak_w", "W", "highest dissipation during switch-on", _ON),
    Figure("vrms_v", "V", "open-circuit RMS voltage"),
    Figure("apparent_power_va", "VA", "apparent power"),
    Figure("vds_max_v", "V", "highest drain-source voltage"),
    Figure("id_max_a", "A", "highest drain current"),
    Figure("current_min_a", "A", "lowest current"),
    Figure("current_max_a", "A", "highest current"),
    Figure("switch_on_voltage_max_v", "V", "highest voltage across it during switch-on", _ON),
    Figure("ring_frequency_hz", "Hz", "frequency of the ringing after the diode turns off", _HF),
    Figure("ring_peak_v", "V", "how far the reverse voltage goes above the settled PIV (piv_v) with the ringing",
           _HF),
    Figure("ring_decay_s", "s", "time for the ringing to fall to 1/e", _HF),
)


def unit_of(name: str) -> str:
    """The unit of a figure or per-part quantity ("" when unknown or a ratio)."""
    f = FIGURES.get(name) or PART_FIGURES.get(name)
    return f.unit if f is not None else ""
