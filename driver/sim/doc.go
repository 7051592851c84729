// Package sim is rolloff's simulated bench: real SCPI servers on loopback
// TCP (and pseudo-terminals on request) for a signal generator, a DC
// voltmeter, a range switch and an AC DMM, coupled through a physical
// model of the chain
//
//	generator → DUT → analog true-RMS converter → DC output → DC voltmeter
//	                └→ AC DMM (true RMS of the DUT output)
//
// evolving in model time, t_model = (wall time since New) × TimeScale.
// The model (package sim/model) is solved analytically between events —
// a frequency, amplitude, waveform, output or range change — so it is
// exact at any frequency; meters integrate it over their aperture and
// READ? really takes that aperture (scaled to wall time) before it
// answers. The command interpreter is package sim/scpiserver.
//
// With a seed the noise is reproducible: every instrument draws from its
// own PCG stream (math/rand/v2) seeded from Config.Seed, so one
// instrument's timing does not change another's noise.
//
// # Physics
//
// DUT: H(f) = 10^(gain_db/20) × Π sections; the output clips at
// ±clip_v (a clipped sine's RMS is exact:
// (2/π)[P²(θ/2 - sin2θ/4) + V²(π/2 - θ)], θ = asin(V/P)); noise_vrms adds
// in power. Square and triangle waves are Fourier series (4/(πn) and
// 8/(π²n²)·(-1)^((n-1)/2), odd n, up to generator.harmonics, the rest
// added assuming a flat response beyond) passed through H; clipped or
// non-sine waveforms are evaluated on a 4096-point period grid.
//
// Converter: τ y' + y = x², y the mean square (independent of range), τ
// the selected range's time constant; DC output = √y / FS × dc_full_scale_v,
// saturating at saturate_fraction × dc_full_scale_v. For a sine the
// ripple on y is 1/√(1+(4πfτ)²) of its mean at 2f; a step settles as
// e^{-t/τ}. A first-order input roll-off at droop_hz, a noise floor
// (floor_fraction of full scale, in power), output noise noise_v in
// noise_bandwidth_hz, and every hold_interval_s the output freezes for
// hold_s. Range -1 (every relay open) gives 0 V.
//
// Voltmeter: a reading is the mean DC output over the aperture (NPLC /
// line_hz, or APERture seconds), plus converter noise averaged by the
// aperture, noise_v·√min(1, 1/(2·B·T)), plus the voltmeter's own
// noise_v·√(1/line_hz / T). Beyond range × (1 + over_range_fraction) the
// answer is 9.9E37. The DMM reads √y of its own averager (time_constant_s,
// bandwidth_hz, floor_vrms) in the same way.
//
// Generator: the amplitude is the RMS across the load the generator is
// set for (OUTPut:LOAD; INFinity: the open-circuit voltage). The DUT sees
// emf × R_in/(R_in + source_ohm), the emf being set × (load+source)/load;
// with LOAD 50 into a high-impedance DUT the DUT sees twice the setting,
// as on real generators. VPP is 2 × crest factor × Vrms; DBM is power into
// dbm_fixed_ohm (dbm_reference "fixed", the demo's 50 Ω) or into the
// OUTPut:LOAD setting (dbm_reference "load"; DBM at INFinity is -221
// "Settings conflict"): real generators do either. The bench records the
// largest RMS it has put into the DUT input, DC offset included
// (PeakDUTInputVrms), from its own state alone.
//
// Systematic errors (systematic = true; off by default): each instrument
// draws its errors once from [spec], rectangular on the ± limit (JCGM
// 100:2008 §4.3.7), from its own stream seeded by seed, and keeps them:
// the converter's reading x (fraction of full scale) is scaled by
// (1 + range gain)·(1 + band flatness) and its output is x + λ·4x(1−x)
// of full scale (end-point linearity λ), the mean-square state staying
// the true one, so a range change still rescales the output at once; the DC voltmeter reads v·(1 + gain) + offset on each
// range; the generator puts out (1 + amplitude)·10^(band flatness/20)
// times its setting (PeakDUTInputVrms and DUTInputVrms include it).
// drift_ppm_per_hour and drift_walk_ppm multiply the converter's output
// by 1 + a linear drift plus a seeded random walk in model time.
// Bench.Systematic returns the drawn errors.
//
// # Configuration keys
//
// A bench file's [sim] table decodes into Config (TOML, lower_snake_case
// keys; start from DemoConfig so that omitted keys keep demo values).
// FromBenchFile does that for a decoded bench file and reconciles the
// result with the profiles the file names:
//
//	seed, time_scale, line_hz, error_queue_len, systematic,
//	drift_ppm_per_hour, drift_walk_ppm
//	[generator] idn, min_freq_hz, max_freq_hz, min_vrms, max_vrms,
//	            source_ohm, load_ohm (0 = INFinity), reset_freq_hz,
//	            reset_vrms, reset_unit ("VRMS"|"VPP"|"DBM"), harmonics,
//	            dbm_reference ("fixed"|"load"), dbm_fixed_ohm, personality
//	[dut]       gain_db, clip_v (0 = none), noise_vrms, input_ohm (0 = high),
//	            [[dut.sections]] kind, freq_hz, q, order
//	[converter] dc_full_scale_v, saturate_fraction, floor_fraction,
//	            noise_v, noise_bandwidth_hz, droop_hz (0 = none),
//	            hold_interval_s, hold_s, initial_range (-1 = none),
//	            post_filter_s (a second pole; 0 = none),
//	            [[converter.ranges]] name, full_scale_vrms, time_constant_s
//	[voltmeter] idn, ranges_v, over_range_fraction, noise_v, reset_nplc,
//	            max_samples, personality, query_latency_s,
//	            [[dmm.filters]] from_hz, time_constant_s (0 = none)
//	[dmm]       idn, ranges_vrms, over_range_fraction, noise_v, floor_vrms,
//	            time_constant_s, bandwidth_hz (0 = none), reset_nplc,
//	            max_samples, personality, query_latency_s,
//	            [[dmm.filters]] from_hz, time_constant_s
//	[switch]    idn
//	[spec.converter] range_gain_pct, linearity_pct,
//	            [[spec.converter.flatness]] ranges, from_hz, to_hz, flatness_pct
//	[spec.voltmeter] [[spec.voltmeter.accuracy]] range_v, reading_pct, range_pct
//	[spec.generator] amplitude_pct,
//	            [[spec.generator.flatness]] from_hz, to_hz, flatness_db
//
// A personality is a SCPI dialect the instrument speaks instead of its
// full command set ("" or absent), with the shipped profile family that
// describes it (configs/):
//
//	meters     "plain"      READ? only, one reading, no SAMPle:COUNt, no
//	                        NPLCycles or APERture (dmm-plain.toml)
//	           "initfetch"  INITiate then FETCh?, no READ? or MEASure
//	                        (dmm-initfetch.toml)
//	           "measure"    MEASure:VOLTage[:AC]? [range] only (dmm-measure.toml)
//	           "suffixed"   "+1.0E-01 VDC", OVLD, a comma after a burst, a
//	                        3-field *IDN? (dmm-suffixed.toml)
//	           "slow"       200 ms per answer, the link dropped every 50
//	                        queries (dmm-slow.toml)
//	generator  "apply-vpp"  APPLy:SINusoid <f>,<Vpp into 50 Ω>,<offset> only;
//	                        an omitted parameter takes its reset value
//	                        (generator-apply-vpp.toml)
//	           "opc-mute"   output muted 50 ms after a frequency change;
//	                        *OPC? answers when it is back (generator-opc.toml)
//	           "slow"       as for the meters
//
// Section kinds: "highpass1", "lowpass1" (first order, corner freq_hz),
// "highpass2", "lowpass2" (second order, natural frequency freq_hz,
// quality factor q), "butterworth-highpass", "butterworth-lowpass"
// (order 1..20, -3 dB at freq_hz). Validate names the key path of every
// bad value, e.g. "dut.sections[1].q".
//
// # Commands
//
// Every instrument (IEEE 488.2 common commands and SCPI-1999 mandated
// queries): *IDN?, *RST, *CLS, *OPC, *OPC?, *WAI, *TST?, *ESR?, *ESE,
// *ESE?, *SRE, *SRE?, *STB?, SYSTem:ERRor[:NEXT]?, SYSTem:ERRor:COUNt?,
// SYSTem:VERSion? (1999.0).
//
// Generator ("generator"):
//
//	[SOURce[1]:]FREQuency[:CW] <NRf>[HZ]|MIN|MAX|DEF     and ? [MIN|MAX]
//	[SOURce[1]:]FREQuency:FIXed <NRf>                     and ?
//	[SOURce[1]:]VOLTage[:LEVel][:IMMediate][:AMPLitude] <NRf>[V|VPP|VRMS|DBM]|MIN|MAX|DEF
//	                                                      and ? [MIN|MAX] (in the unit)
//	[SOURce[1]:]VOLTage:UNIT VPP|VRMS|DBM                 and ?
//	[SOURce[1]:]FUNCtion[:SHAPe] SINusoid|SQUare|TRIangle and ? (SIN|SQU|TRI)
//	OUTPut[1][:STATe] ON|OFF|1|0                          and ? (1|0)
//	OUTPut[1]:LOAD <NRf>[OHM]|INFinity|MIN|MAX|DEF        and ? (9.9E37 = INF)
//	[SOURce[1]:]VOLTage:OFFSet <NRf>[V]                   and ?
//	APPLy:SINusoid [<freq>[,<amplitude>[,<offset>]]]      (sine; output state unchanged)
//
// Out-of-limit settings answer -222 "Data out of range" and keep the
// previous value. *RST: output off, reset_freq_hz, reset_vrms, reset_unit,
// sine, load_ohm.
//
// DC voltmeter ("voltmeter"); the AC DMM ("dmm") has the same set with
// VOLTage:AC in place of VOLTage[:DC]:
//
//	CONFigure[:SCALar]:VOLTage[:DC] [<range>|AUTO|MIN|MAX|DEF[,<res>|MIN|MAX|DEF]]
//	CONFigure?
//	MEASure[:SCALar]:VOLTage[:DC]? [<range>|AUTO|MIN|MAX|DEF[,<res>]]
//	[SENSe:]FUNCtion[:ON] "VOLT[:DC]"                     and ?
//	[SENSe:]VOLTage[:DC]:RANGe[:UPPer] <NRf>[V]|MIN|MAX|DEF and ?
//	[SENSe:]VOLTage[:DC]:RANGe:AUTO ON|OFF|ONCE           and ?
//	[SENSe:]VOLTage[:DC]:NPLCycles <NRf>|MIN|MAX|DEF      and ?  (0.001..100)
//	[SENSe:]VOLTage[:DC]:APERture <NRf>[S]|MIN|MAX|DEF    and ?  (10 µs..10 s)
//	SAMPle:COUNt <n>|MIN|MAX                              and ?
//	TRIGger[:SEQuence]:SOURce IMMediate                   and ?
//	INITiate[:IMMediate], ABORt, FETCh?, READ?
//
// CONFigure and MEASure set SAMPle:COUNt 1. READ? and FETCh? answer
// SAMPle:COUNt comma-separated NR3 readings taken back to back, after
// that many apertures of wall time; FETCh? without a measurement is -230.
// A range argument picks the smallest range holding it. *RST: autorange,
// reset_nplc, one sample.
//
// Range switch ("switch"), channel n = converter range index + 1:
//
//	ROUTe:CLOSe (@n)        closes n and opens the others (one channel only)
//	ROUTe:CLOSe? (@list)    1|0 per channel
//	ROUTe:CLOSe:STATe?      the closed channel, "(@n)", or "(@)" when none
//	ROUTe:OPEN (@list)      ROUTe:OPEN? (@list)      ROUTe:OPEN:ALL
//
// *RST opens every relay (the converter reads 0 V until a range is
// closed).
//
// # Faults
//
// Faults(role) returns hooks for reliability tests: DropNow, DropMidQuery
// (the command executes, the answer never comes), DelayNext, CorruptNext
// (numeric answers), TruncateNext, PushError, Gone (connections closed,
// new ones refused for a while), ForceOverflow (meters answer 9.9E37) and
// OverloadConverter. Received(role) lists every program message unit an
// instrument received.
package sim
