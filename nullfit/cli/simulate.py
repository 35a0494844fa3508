"""``nullfit simulate OUT.csv``: a synthetic log (CSV or Parquet) and its manifest, truth in the notes.

What an experiment is planned with: turns, readings per turn (or marks), noise model, drift, an
injected 2θ signal, tilt/temperature channels coupled into the signal.  The manifest beside the
log (same stem, ``.toml``) records every ingredient and the seed in ``[notes] text``.
"""

from __future__ import annotations

from .options import UsageError, parse_site


def add_parser(sub) -> None:
    s = sub.add_parser("simulate", help="write a synthetic log and manifest with a known truth",
                       description="Write a synthetic rotation-scan log (CSV or Parquet, by the suffix of OUT) and "
                                   "a TOML manifest beside it (same stem) whose notes hold the truth and the seed. "
                                   "Amplitudes are amplitudes, not peak-to-peak.")
    s.add_argument("out", metavar="OUT", nargs="?", help="output log: NAME.csv, NAME.parquet or NAME.pq")
    s.add_argument("-o", "--output", metavar="OUT", dest="output",
                   help="the same as OUT, spelled as in report and turns")
    s.add_argument("--force", action="store_true", help="overwrite an existing log or manifest")
    s.add_argument("--seed", type=int, default=None, help="random seed (recorded; default: a fresh one)")
    s.add_argument("--run-id", metavar="ID", help="run id written to the manifest (default: OUT's stem)")

    g = s.add_argument_group("sampling")
    g.add_argument("--turns", type=float, default=20, metavar="N", help="turns of the table (default 20)")
    g.add_argument("--per-turn", type=int, default=64, metavar="N", help="readings per turn (default 64)")
    g.add_argument("--marks", type=int, default=None, metavar="M",
                   help="read at M equally spaced marks per turn instead of --per-turn (default: off)")
    g.add_argument("--period", type=float, default=60.0, metavar="S", help="seconds per turn (default 60)")
    g.add_argument("--start-utc", metavar="TIME", default=None,
                   help="UTC time of the first reading, ISO-8601 whole seconds (default 2026-03-09T23:46:40Z)")
    g.add_argument("--signal-unit", choices=("fringe", "fractional"), default="fringe",
                   help="fringe or fractional frequency (default fringe)")

    g = s.add_argument_group("signal")
    g.add_argument("--amplitude", type=float, default=None, metavar="A",
                   help="injected 2θ amplitude in signal units (default 0; not peak-to-peak)")
    g.add_argument("--phase", type=float, default=0.0, metavar="DEG", help="phase of the 2θ term (default 0)")
    g.add_argument("--c2", type=float, default=None, metavar="C", help="cos 2θ coefficient (instead of --amplitude)")
    g.add_argument("--s2", type=float, default=None, metavar="S", help="sin 2θ coefficient (instead of --amplitude)")
    g.add_argument("--amplitude-1theta", type=float, default=0.0, metavar="A", help="1θ amplitude (default 0)")

    g = s.add_argument_group("sky-frame signal (sidereal and annual modulation, docs/sky.md)")
    g.add_argument("--sky-model", choices=("sme", "rms"), default=None,
                   help="inject the signal of a test theory (needs --site, --mark-azimuth and an absolute start)")
    g.add_argument("--sky", metavar="NAME=VALUE[,NAME=VALUE]", default=None,
                   help="its parameters: e_XY e_XZ e_YZ e_XX-YY e_ZZ o_XY o_XZ o_YZ (sme) or P_MM (rms)")
    g.add_argument("--site", metavar="LAT,LON", default=None, help="site latitude,longitude in degrees (east positive)")
    g.add_argument("--mark-azimuth", type=float, default=None, metavar="DEG",
                   help="geographic azimuth of the table's reference mark (N through E)")
    g.add_argument("--table-sense", choices=("clockwise", "counterclockwise"), default="clockwise",
                   help="the table's positive sense seen from above (default clockwise)")
    g.add_argument("--readout-sign", type=int, choices=(1, -1), default=1,
                   help="+1 when the signal grows as arm 1's round trip lengthens; -1 for a logged beat "
                        "(ν1 − ν2)/ν (default +1)")

    g = s.add_argument_group("noise and drift")
    g.add_argument("--noise", choices=("white", "ar1", "flicker"), default="white", help="noise model (default white)")
    g.add_argument("--noise-sigma", type=float, default=0.01, metavar="SIGMA",
                   help="standard deviation of one reading's noise, signal units (default 0.01)")
    g.add_argument("--ar1", type=float, default=None, metavar="RHO", help="lag-one coefficient per reading (ar1)")
    g.add_argument("--flicker-alpha", type=float, default=None, metavar="ALPHA",
                   help="spectral exponent of flicker noise, PSD ∝ 1/f^ALPHA (default 1)")
    g.add_argument("--drift-slope", type=float, default=0.0, metavar="PER_S", help="linear drift per second (default 0)")
    g.add_argument("--drift-walk", type=float, default=0.0, metavar="STEP",
                   help="random-walk step of the drift per reading (default 0)")

    g = s.add_argument_group("auxiliary channels (coupled into the signal)")
    g.add_argument("--tilt", type=float, default=None, metavar="A_URAD",
                   help="add a tilt column tilt_urad with a 2θ part of this amplitude in µrad (default: no tilt)")
    g.add_argument("--tilt-phase", type=float, default=0.0, metavar="DEG", help="phase of the tilt's 2θ part")
    g.add_argument("--tilt-walk", type=float, default=0.0, metavar="URAD", help="random-walk step of the tilt")
    g.add_argument("--tilt-coupling", type=float, default=0.0, metavar="K",
                   help="signal units per µrad of tilt (default 0)")
    g.add_argument("--temperature", type=float, default=None, metavar="K_PER_S",
                   help="add a temperature column temperature_k drifting at this rate (default: none)")
    g.add_argument("--temperature-walk", type=float, default=0.0, metavar="K", help="random-walk step (K)")
    g.add_argument("--temperature-coupling", type=float, default=0.0, metavar="K",
                   help="signal units per kelvin (default 0)")
    g.add_argument("--aux-noise", type=float, default=0.0, metavar="SIGMA",
                   help="sensor noise of every auxiliary channel, in its own unit (default 0)")

    g = s.add_argument_group("apparatus in the manifest (optional)")
    g.add_argument("--arm-length", type=float, metavar="M", help="effective arm length in metres")
    g.add_argument("--wavelength", type=float, metavar="M", help="wavelength in metres")


def _check(args) -> None:
    import math

    def finite(name, v):
        if v is not None and not math.isfinite(v):
            raise UsageError(f"{name} must be a finite number, not {v}")

    for name in ("--turns", "--period", "--amplitude", "--phase", "--c2", "--s2", "--amplitude-1theta",
                 "--noise-sigma", "--ar1", "--flicker-alpha", "--drift-slope", "--drift-walk", "--tilt",
                 "--tilt-phase", "--tilt-walk", "--tilt-coupling", "--temperature", "--temperature-walk",
                 "--temperature-coupling", "--aux-noise", "--arm-length", "--wavelength"):
        finite(name, getattr(args, name[2:].replace("-", "_")))
    if args.turns <= 0:
        raise UsageError(f"--turns must be positive, not {args.turns:g}")
    if args.period <= 0:
        raise UsageError(f"--period must be positive (seconds per turn), not {args.period:g}")
    if args.marks is None and args.per_turn < 3:
        raise UsageError(f"--per-turn must be at least 3, not {args.per_turn}")
    if args.marks is not None and args.marks < 3:
        raise UsageError(f"--marks must be at least 3, not {args.marks}")
    if args.marks is not None and abs(args.turns * args.marks - round(args.turns * args.marks)) > 1e-9:
        raise UsageError(f"--turns {args.turns:g} is not a whole number of marks ({args.marks} per turn)")
    if args.noise_sigma < 0:
        raise UsageError(f"--noise-sigma must be >= 0, not {args.noise_sigma:g}")
    if args.noise == "ar1":
        if args.ar1 is None:
            raise UsageError("--noise ar1 needs --ar1 RHO (lag-one coefficient per reading, -1 < RHO < 1)")
        if not -1 < args.ar1 < 1:
            raise UsageError(f"--ar1 must lie strictly between -1 and 1, not {args.ar1:g}")
    elif args.ar1 is not None:
        raise UsageError("--ar1 needs --noise ar1")
    if args.flicker_alpha is not None and args.noise != "flicker":
        raise UsageError("--flicker-alpha needs --noise flicker")
    if args.amplitude is not None and (args.c2 is not None or args.s2 is not None):
        raise UsageError("give the 2θ signal as --amplitude/--phase or as --c2/--s2, not both")
    for name in ("amplitude", "amplitude_1theta", "drift_walk", "tilt", "tilt_walk", "temperature_walk", "aux_noise"):
        v = getattr(args, name)
        if v is not None and v < 0:
            raise UsageError(f"--{name.replace('_', '-')} must be >= 0, not {v:g}")
    if args.tilt is None and (args.tilt_coupling or args.tilt_walk or args.tilt_phase):
        raise UsageError("--tilt-coupling/--tilt-walk/--tilt-phase need --tilt A_URAD (use --tilt 0 for a tilt "
                         "without a 2θ part)")
    if args.temperature is None and (args.temperature_coupling or args.temperature_walk):
        raise UsageError("--temperature-coupling/--temperature-walk need --temperature K_PER_S")
    if (args.arm_length is None) != (args.wavelength is None):
        raise UsageError("give both --arm-length and --wavelength (or neither)")
    if args.sky_model is None:
        if args.sky is not None:
            raise UsageError("--sky needs --sky-model sme|rms")
    else:
        if args.site is None or args.mark_azimuth is None:
            raise UsageError("--sky-model needs --site LAT,LON and --mark-azimuth DEG (the sky is seen from the site)")
        if args.signal_unit == "fringe" and args.arm_length is None:
            raise UsageError("--sky-model with --signal-unit fringe needs --arm-length and --wavelength "
                             "(fringes = 2L/λ × the fractional signal)")


def run(args) -> int:
    from pathlib import Path

    _check(args)
    from ..core.conventions import amplitude_phase
    from ..simulation.logs import simulate_log, temperature, tilt, write_log
    from ..simulation.scans import DEFAULT_EPOCH_UNIX

    if (args.out is None) == (args.output is None):
        raise UsageError("give the output log once: nullfit simulate OUT.csv (or -o OUT.csv)")
    out = Path(args.out if args.out is not None else args.output)
    if out.suffix.lower() not in (".csv", ".parquet", ".pq"):
        raise UsageError(f"{out}: OUT must end in .csv, .parquet or .pq")
    epoch = DEFAULT_EPOCH_UNIX
    if args.start_utc is not None:
        from .options import normalise_utc
        from ..reading.timebase import utc_to_ns

        ns = utc_to_ns(normalise_utc(args.start_utc))
        if ns % 1_000_000_000:
            raise UsageError(f"--start-utc must be a whole second, not {args.start_utc}")
        epoch = ns // 1_000_000_000
    harmonics = {}
    if args.c2 is not None or args.s2 is not None:
        a2, p2 = amplitude_phase(args.c2 or 0.0, args.s2 or 0.0, 2)
    else:
        a2, p2 = (args.amplitude or 0.0), args.phase
    if a2 > 0:
        harmonics[2] = (a2, p2)
    if args.amplitude_1theta > 0:
        harmonics[1] = (args.amplitude_1theta, 0.0)
    channels = []
    if args.tilt is not None:
        channels.append(tilt(args.tilt_coupling, amplitude_2theta=args.tilt, phase_2theta_deg=args.tilt_phase,
                             walk_step=args.tilt_walk, sensor_sigma=args.aux_noise))
    if args.temperature is not None:
        channels.append(temperature(args.temperature_coupling, slope_per_s=args.temperature,
                                    walk_step=args.temperature_walk, sensor_sigma=args.aux_noise))
    extra, site_table, app_table = _sky(args)
    df, truth = simulate_log(
        aux=channels, extra=extra, rng=args.seed, n_turns=args.turns, period_s=args.period, samples_per_turn=args.per_turn,
        marks=args.marks, harmonics=harmonics, drift={"slope": args.drift_slope, "walk_step": args.drift_walk},
        noise=args.noise, sigma=args.noise_sigma, ar1_coef=args.ar1, flicker_alpha=args.flicker_alpha,
        epoch_unix=int(epoch), signal_unit=args.signal_unit, time_format="relative")
    apparatus = app_table
    if apparatus is None and args.arm_length is not None:
        apparatus = {"arm_length_m": args.arm_length, "wavelength_m": args.wavelength, "signal": args.signal_unit}
    log, man = write_log(out, df, truth, force=args.force, run_id=args.run_id or out.stem, apparatus=apparatus,
                         site=site_table)
    print(f"wrote {log} ({len(df)} readings, {args.turns:g} turns) and {man} (truth and seed "
          f"{truth.scan.seed} in [notes])")
    return 0


def _sky(args):
    """The sky-frame injection: ``([(label, f(times_unix, theta))], site table, apparatus table)``."""
    if args.sky_model is None:
        return [], None, None
    from ..hypothesis.apparatus import Apparatus
    from ..hypothesis.sidereal import template
    from ..hypothesis.site import Site
    from ..simulation.sky import manifest_tables

    lat, lon = parse_site(args.site)
    params = {}
    for item in filter(None, (t.strip() for t in (args.sky or "").split(","))):
        name, _, value = item.partition("=")
        try:
            params[name.strip()] = float(value)  # a missing "=" leaves value empty: refused here too
        except ValueError:
            raise UsageError(f"--sky takes NAME=VALUE pairs (e.g. e_XY=1e-16), not {item!r}") from None
    site = Site(lat, lon, mark_azimuth_deg=args.mark_azimuth, table_sense=args.table_sense, name="simulated site")
    app = Apparatus(args.arm_length, args.wavelength, signal=args.signal_unit, readout_sign=args.readout_sign,
                    name="simulated apparatus")
    template("rms" if args.sky_model == "rms" else "sme", params, site=site, apparatus=app, theta=[0.0],
             times=[1.8e9])  # checks the parameter names at once (one-line error)
    label = f"sky {args.sky_model}: " + ", ".join(f"{k}={v:g}" for k, v in params.items())

    def signal(times, theta):
        return template(args.sky_model, params, site=site, apparatus=app, theta=theta, times=times)

    s_tab, a_tab = manifest_tables(site, app)
    return [(label, signal)], s_tab, a_tab
