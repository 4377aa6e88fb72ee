"""Command line: ``windsolve run | check | inspect | plot | lines | compare | match | sweep |
family | tabulate``.

Every failure the user can fix ends with exit status 2 and one line on
stderr naming the problem and the fix; no traceback, no output file.  That
includes bad command lines (unknown commands and options, values argparse
cannot read), whose usage text argparse would otherwise print.
"""

import argparse
import math
import os
import re
import sys
from pathlib import Path

from .errors import WindsolveError

EXIT_OK = 0
EXIT_BAD_INPUT = 2  # bad input or no solution: nothing written
EXIT_PARTIAL = 3  # a solution that stops before the outer radius (file written)

DESCRIPTION = ("Steady continuum-driven (radiation-pressure-driven) stellar winds: "
               "find the transonic solution, its mass-loss rate and profiles.")


def _load(path, assignments=()):
    """(model, how to name it): the file (the built-in demo when None) with --set applied."""
    from . import demo_model_path
    from .modelfile import load_model_with
    source = "built-in demo" if path is None else str(path)
    model = load_model_with(demo_model_path() if path is None else path, list(assignments))
    if assignments:
        source += " with " + ", ".join(assignments)
    return model, source


HINT_SECONDS = 3.0  # run: the longest a "which way to move" scan may take


def cmd_run(args: argparse.Namespace) -> int:
    """``windsolve run [MODEL] [--set KEY=VALUE ...] [-o OUT.h5] [-q]``: solve one model.

    The model file (the built-in demo when none is given) is loaded, each
    ``--set section.key=value`` applied in order (the value as a model file
    writes it; :func:`windsolve.modelfile.load_model_with`), and the output
    path checked before the solve.  Unless ``-q``, prints ``model:
    SOURCE`` and the result's summary, then ``wrote OUT.h5`` after writing the
    result with ``-o``.  A solution that stops before the outer radius is
    written all the same, and its status and message go to stderr (even with
    ``-q``).

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0) for a converged solution, EXIT_PARTIAL (3) for one that
        stops before the outer radius.

    Raises
    ------
    WindsolveError
        A bad model file or output path, or no solution at all ("no
        solution: ..."; nothing is written).
    """
    from .solve import solve
    model, source = _load(args.model, args.set or ())
    if args.output is not None:
        _check_output(args.output, ".h5")
    result = solve(model)
    if not result.profile:
        # No solution at all: say why in one line (and only there), write nothing.
        message = result.message
        if not message.startswith(("no solution", "no transonic solution")):  # said once
            message = f"no solution: {message}"
        from .registry import spec_for
        hint = spec_for(model).hint
        if hint is not None and result.status == "no_solution":
            where = hint(model, HINT_SECONDS)  # which way to move (a quick scan)
            if where:
                message = f"{message}; {where}"
        raise WindsolveError(message)
    if not args.quiet:
        print(f"model: {source}")
        print(result)
    if args.output is not None:
        result.to_hdf5(args.output)
        if not args.quiet:
            print(f"wrote {args.output}")
    if not result.converged:
        print(f"windsolve: {result.status}: {result.message}", file=sys.stderr)
        return EXIT_PARTIAL
    return EXIT_OK


def _check_output(path, default_ext):
    from .io import check_output_path
    check_output_path(path, example=f"wind{default_ext}")


def cmd_check(args: argparse.Namespace) -> int:
    """``windsolve check [MODEL] [--set KEY=VALUE ...]``: validate a model without solving it.

    Prints the derived numbers of the model's kind (its registered spec's
    ``check``), one ``KEY  VALUE`` line each, aligned, then any ``note:`` lines.
    Writes nothing.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    ModelError
        The model file is missing, not valid TOML or not a valid model.
    """
    from .registry import spec_for

    model, source = _load(args.model, args.set or ())
    if getattr(args, "plot", None):
        _check_output(args.plot, ".png")
        if spec_for(model).opacity_path is None:
            raise WindsolveError(f"check --plot: a {model.kind} model has no temperature path "
                             f"to draw (kappa and Gamma along T are drawn for diffusion "
                             f"models)")
    rows, notes = spec_for(model).check(model, source)
    width = max(len(k) for k, _ in rows)
    for key, value in rows:
        print(f"  {key:<{width}}  {value}")
    for note in notes:
        print(f"  note: {note}")
    if getattr(args, "plot", None):
        from .opacity_plot import plot_opacity_path
        plot_opacity_path(model, args.plot)
        print(f"  plot: {args.plot}")
    return EXIT_OK


def _scan_value(text, scan, option):
    """A --from/--to value of a family: a number in the scan's unit, or a quantity."""
    from ._units import to_quantity
    from .family import SCANS
    unit = SCANS[scan]
    try:
        return float(text)
    except ValueError:
        return float(to_quantity(text.strip(), unit, option).to_value(unit))


def cmd_family(args: argparse.Namespace) -> int:
    """``windsolve family MODEL --scan Q --from A --to B``: solve a family of models.

    Scans one quantity of a photosphere-anchored diffusion model (``--num``
    log-spaced members; ``--from``/``--to`` a number in the scan's unit or a
    value with a unit), every member a full solve.  The range and the output
    paths are checked before the solve.  Unless ``-q``: a progress bar on
    stderr (only on a terminal), then the family's header, its table and where
    and why it ends.  Writes the table (and the members' profiles with
    ``--profiles``) to ``-o`` and a plot to ``--plot``, each followed by a
    ``wrote`` line unless ``-q``.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    WindsolveError
        A bad model, scan range, count or output path, or no member of the
        family has a solution (nothing is written).
    """
    from .family import SCANS, check_family, plot_family, solve_family
    model, source = _load(args.model)
    start = _scan_value(args.start, args.scan, "--from")
    stop = _scan_value(args.stop, args.scan, "--to")
    check_family(model, args.scan, start, stop, args.num)
    if args.output is not None:
        _check_output(args.output, ".h5")
    if args.plot is not None:
        _check_output(args.plot, ".png")
    progress = None
    bar = None
    if not args.quiet:
        from tqdm import tqdm
        # No bar when stderr is not a terminal (disable=None): a log gets no \r junk.
        bar = tqdm(total=args.num, desc="family", unit="model", leave=False, disable=None)

        def progress(done, total):
            bar.update(1)
    try:
        result = solve_family(model, args.scan, start, stop, args.num, progress)
    finally:
        if bar is not None:
            bar.close()  # before any message, so that no error shares the bar's line
    if not args.quiet:
        print(f"family of {source} along {args.scan} [{SCANS[args.scan].to_string()}]")
        print("\n".join(result.lines()))
        if result.ends:
            print(result.ends)
    if not result.converged.any():
        raise WindsolveError(f"no member of the family has a solution: "
                             f"{result.members[0].message}")
    if args.output is not None:
        result.to_hdf5(args.output, profiles=args.profiles)
        if not args.quiet:
            print(f"wrote {args.output}")
    if args.plot is not None:
        plot_family(result, args.plot)
        if not args.quiet:
            print(f"wrote {args.plot}")
    return EXIT_OK


def cmd_sweep(args: argparse.Namespace) -> int:
    """``windsolve sweep SWEEP.toml -o OUT.h5``: run every model of a parameter sweep.

    Runs locally (``--workers`` processes, default all cores) or on a
    dask.distributed cluster (``--scheduler``), journaling finished models so
    that ``--resume`` finishes an interrupted sweep, and writes the sweep's
    table to ``-o``.  Unless ``-q``: one line describing the sweep and where
    it runs, then the count of each status, a note on models with a
    hydrostatic base, and ``wrote OUT.h5``.  When interrupted (Ctrl-C: the
    local workers are ended at once, every finished model stays in the
    journal), says on stderr how many models are kept and the command that
    resumes.  ``--resume`` without a journal says so in one line on stderr
    (also with ``-q``) and runs the whole sweep.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0), or 130 when the sweep was interrupted (the finished
        models kept for ``--resume``).

    Raises
    ------
    WindsolveError
        A bad sweep file or ``--workers`` below 1, an unusable output path, a
        journal of an interrupted run without ``--resume``, an output locked
        by another running sweep, a journal or lock file that cannot be
        written (OutputError), or a sweep in which no model finished for
        ``--stall-timeout`` seconds.
    """
    from .sweep import load_sweep, run_sweep
    sweep = load_sweep(args.sweep)
    if args.profiles:
        sweep.profiles = True
    if args.workers is not None and args.workers < 1:
        raise WindsolveError("--workers must be at least 1")
    _check_output(args.output, ".h5")
    if args.resume:
        from .sweep.runner import JOURNAL_SUFFIX
        journal = Path(args.output + JOURNAL_SUFFIX)
        if not journal.exists():
            # Not an error: a script may always pass --resume. But never silently.
            print(f"windsolve: nothing to resume (no journal {journal}: the last run "
                  f"finished, or none started); running all {len(sweep)} models",
                  file=sys.stderr)
    if not args.quiet:
        where = f"dask scheduler {args.scheduler}" if args.scheduler else \
            f"{args.workers or 'all'} local worker(s)"
        print(f"{args.sweep}: {len(sweep)} {sweep.kind} models ({sweep.design} design over "
              f"{', '.join(a.key for a in sweep.axes)}) on {where}")
    try:
        run = run_sweep(sweep, args.output, workers=args.workers,
                        scheduler=args.scheduler, resume=args.resume, quiet=args.quiet,
                        stall_timeout=args.stall_timeout, in_process=False)
    except OSError as error:  # its journal or lock file (the table's write says so itself)
        from .io import output_error
        raise output_error(error.filename or args.output, error) from None
    if run.interrupted:
        print(f"windsolve: interrupted: {run.done} of {len(sweep)} models done and kept; "
              f"resume with: windsolve sweep {args.sweep} -o {args.output} --resume",
              file=sys.stderr)
        return 130
    if not args.quiet:
        from .result import HYDROSTATIC_EFOLDS
        print("  " + ", ".join(f"{k}: {v}" for k, v in run.statuses.items()))
        if run.hydrostatic:
            print(f"  {run.hydrostatic} converged models have a hydrostatic base (more than "
                  f"{HYDROSTATIC_EFOLDS:g} density e-folds below the sonic point: an "
                  f"atmosphere, not a wind); see the table's hydrostatic column")
        print(f"wrote {args.output}")
    return EXIT_OK


# LineSettings fields -> the command-line options that set them (for messages).
_LINE_OPTIONS = {"emissivity_power": "--emissivity-power", "occultation": "--no-occultation",
                 "turbulence": "--turbulence", "resolution": "--resolution",
                 "hwzi_fraction": "--hwzi-fraction", "edge_depth": "--edge-depth",
                 "line_strength": "--line-strength"}


def _line_settings(args):
    """LineSettings from the shared line options (one-line errors naming the option)."""
    from .errors import ModelError
    try:
        return _make_line_settings(args)
    except ModelError as error:
        text = str(error)
        for name, option in _LINE_OPTIONS.items():
            text = text.replace(f"LineSettings.{name}", option)
        raise ModelError(text) from None


def _make_line_settings(args):
    from .lines import LineSettings
    return LineSettings(**_line_option_kwargs(args))


def _line_option_kwargs(args):
    """The line options given on the command line, as LineSettings keywords."""
    kwargs = {}
    if getattr(args, "emissivity_power", None) is not None:
        kwargs["emissivity_power"] = args.emissivity_power
    if getattr(args, "no_occultation", False):
        kwargs["occultation"] = False
    if getattr(args, "turbulence", None) is not None:
        kwargs["turbulence"] = args.turbulence
    if getattr(args, "resolution", None) is not None:
        text = args.resolution.strip()
        try:
            kwargs["resolution"] = float(text)  # a resolving power R
        except ValueError:
            kwargs["resolution"] = text  # a velocity such as "30 km/s"
    if getattr(args, "hwzi_fraction", None) is not None:
        kwargs["hwzi_fraction"] = args.hwzi_fraction
    if getattr(args, "edge_depth", None) is not None:
        kwargs["edge_depth"] = args.edge_depth
    if getattr(args, "line_strength", None) is not None:
        kwargs["line_strength"] = args.line_strength
    return kwargs


def _add_line_options(p):
    g = p.add_argument_group("line settings")
    g.add_argument("--emissivity-power", type=int, metavar="N",
                   help="emissivity j proportional to rho^N, N = 1 or 2 (default 2)")
    g.add_argument("--no-occultation", action="store_true",
                   help="do not hide the emission behind the stellar (photospheric) disk")
    g.add_argument("--turbulence", metavar="V",
                   help="Gaussian turbulent broadening, FWHM, e.g. \"20 km/s\"")
    g.add_argument("--resolution", metavar="V|R",
                   help="instrumental resolution: a velocity FWHM (\"30 km/s\") or a "
                        "resolving power R (a plain number, FWHM = c/R)")
    g.add_argument("--hwzi-fraction", type=float, metavar="F",
                   help="HWZI is measured where the line falls to F of its peak (default 0.05)")
    g.add_argument("--edge-depth", type=float, metavar="D",
                   help="blue edge: where the P Cygni absorption depth reaches D (default 0.1)")
    g.add_argument("--line-strength", type=float, metavar="K",
                   help="Sobolev line strength of the P Cygni line (default 100)")


def _result_spec(result):
    """The ModelSpec of a result's model; for a file without a readable model, the one
    model whose summary keys cover the result's finite values (None if not one)."""
    import math

    from .registry import MODEL_SPECS
    spec = MODEL_SPECS.get(getattr(result.model, "kind", None))
    if spec is not None:
        return spec
    keys = {k for k, q in result.summary.items()
            if getattr(q, "isscalar", False) and math.isfinite(q.value)}
    fits = [s for s in MODEL_SPECS.values() if keys <= set(s.summary_units)]
    return fits[0] if len(fits) == 1 else None


def cmd_lines(args: argparse.Namespace) -> int:
    """``windsolve lines FILE [-o OUT] [--pcygni]``: a synthetic line profile and its widths.

    Computes an optically thin emission line (a Sobolev P Cygni line with
    ``--pcygni``) from the result file's profile with the line options, and
    prints its FWHM, HWZI and blue-edge velocity [km/s], the model's terminal
    velocity and, when an emission line is narrower than the sound speed, a
    note saying so.  ``-o`` writes the profile as CSV (``.csv``) or plots it
    (``.png``/``.pdf``/``.svg``), then prints ``wrote OUT``.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    WindsolveError
        An ``-o`` suffix other than those, an unusable output path, a bad
        line option (ModelError naming the option), a damaged result file
        (OutputError), or a result without a profile.
    """
    import astropy.units as u
    import numpy as np

    from .lines import emission_profile, pcygni_profile
    from .result import WindResult
    settings = _line_settings(args)
    if args.output is not None:
        suffix = Path(args.output).suffix.lower()
        if suffix not in (".csv", ".png", ".pdf", ".svg"):
            raise WindsolveError(f"-o {args.output}: give a .csv file for the profile or a "
                                 f".png/.pdf/.svg file for a plot")
        _check_output(args.output, ".csv")
    from .files import read_any_file
    kind = read_any_file(args.file)  # refuses anything but a windsolve file, by name
    if kind == "result":
        if args.row is not None:
            raise WindsolveError(f"--row {args.row}: {args.file} is a result file (one "
                                 f"model); --row picks a row of a sweep or family file")
        result = WindResult.from_hdf5(args.file)
    else:
        from .observe import read_grid, row_model
        from .solve import solve
        if args.row is None:
            raise WindsolveError(f"{args.file} is a {kind} file: give --row N for the row "
                                 f"whose line to compute (its model is solved again)")
        result = solve(row_model(read_grid(args.file), args.row))
        if not result.converged:
            raise WindsolveError(f"{args.file} row {args.row}: the model did not converge "
                                 f"({result.message})")
    if not result.profile:
        raise WindsolveError(f"{args.file}: the result has no profile ({result.message})")
    line = (pcygni_profile if args.pcygni else emission_profile)(result, settings)
    plot = args.output is not None and Path(args.output).suffix.lower() != ".csv"
    if plot:  # refuse a profile that is no solution before printing anything
        from .plotting import check_line
        check_line(line)

    def kms(q):
        v = q.to_value(u.km / u.s)
        if not np.isfinite(v):
            return "not defined"
        return f"{v:.1f} km/s" if abs(v) >= 10 else f"{v:.3g} km/s"

    where = args.file if args.row is None else f"{args.file} row {args.row}"
    print(f"{where}: {'P Cygni' if args.pcygni else 'optically thin emission'} line, "
          f"emissivity ~ rho^{settings.emissivity_power}, "
          f"{'with' if settings.occultation else 'without'} occultation")
    print(f"  FWHM  {kms(line.fwhm)}")
    print(f"  HWZI  {kms(line.hwzi)}   (at {settings.hwzi_fraction:g} of the peak)")
    print(f"  blue edge  {kms(line.edge_velocity)}   (absorption depth {settings.edge_depth:g})")
    v_inf = result.summary.get("terminal_velocity")
    if v_inf is not None:
        spec = _result_spec(result)
        print(f"  model {spec.terminal_label if spec else 'terminal velocity'}  {kms(v_inf)}")
    if line.fastest is not None:
        traced = "the edge and HWZI trace the fastest gas"
        if line.slows_outward:
            print(f"  fastest gas in the line  {kms(line.fastest)}   (v falls outward beyond "
                  f"it: {traced}, not the terminal velocity)")
        else:
            print(f"  fastest gas in the line  {kms(line.fastest)}   (v rises outward: "
                  f"{traced}, the outermost)")
    a = result.summary.get("sonic_velocity")
    if (not args.pcygni and a is not None and np.isfinite(line.fwhm.value)
            and line.fwhm < a and settings.broadening_fwhm.value == 0):
        print(f"  note: the line is narrower than the sound speed ({kms(a)}): it comes from "
              f"the nearly hydrostatic base; give --turbulence of about the sound speed for "
              f"a line one could observe")
    if args.output is not None:
        if Path(args.output).suffix.lower() == ".csv":
            line.to_csv(args.output)
        else:
            from .plotting import plot_line
            plot_line(line, args.output, title=f"{getattr(result.model, 'name', '')}",
                      settings=settings)
        print(f"wrote {args.output}")
    return EXIT_OK


def _line_kwargs(args):
    """The line options given (checked first: one-line errors naming the option)."""
    _line_settings(args)
    return _line_option_kwargs(args)


def cmd_compare(args: argparse.Namespace) -> int:
    """``windsolve compare FILE OBSERVED.csv``: predicted against observed widths.

    FILE is any windsolve result, family or sweep file (anything else is
    refused by name).  Every comparison first prints the line settings it
    used.  For a result file (one object: ``--object`` when the CSV holds
    several): prints each observed quantity with its
    uncertainty, the model's value [km/s] and the residual [sigma], and chi^2
    over the measurements the model predicts; a measurement it cannot predict
    is listed as excluded, with its reason.  For a sweep or family file, per
    object of the observations file: rows, measurements used and exclusions
    (each with its reason) counted separately, the five rows with the lowest
    chi^2, chi^2_min with the number of free parameters (the axes), and the
    Delta chi^2 ranges of each axis at 1, 2 and 3 sigma, for one parameter of
    interest and (two or more axes) jointly for two.  ``-o`` writes the
    comparison as CSV (a sweep or family: row, axes in the sweep file's units,
    Mdot, v_inf, each prediction and residual, chi^2); ``--plot`` plots the
    residuals or the chi^2 map.  Each file written is followed by a ``wrote`` line.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    WindsolveError
        A bad observed-widths file or ``--object``, an unusable output path,
        a file that is no windsolve file, a result that did not converge,
        a quantity the file cannot predict, line options that differ from a
        sweep's stored settings (or given for a file without widths), no
        measurement a model predicts, or a sweep without a compared row.
        Nothing is written.
    """
    from .files import read_any_file
    from .observe import read_observed, read_observed_objects
    for target in (args.output, args.plot):
        if target is not None:
            _check_output(target, ".csv")
    if args.output is not None and args.plot is not None and \
            Path(args.output).resolve() == Path(args.plot).resolve():
        raise WindsolveError(f"-o and --plot are both {args.output}: give two files")
    kind = read_any_file(args.file)  # one line if it is no windsolve file
    if kind == "result":  # one model, one object (--object when the file holds several)
        observations = read_observed(args.observed, args.object)
        return _compare_result(args, {observations[0].object: observations})
    return _compare_grid(args, read_observed_objects(args.observed, args.object))


def _compare_result(args, objects):
    import numpy as np

    from .observe import UNDEFINED, compare_result, settings_text
    from .result import WindResult
    result = WindResult.from_hdf5(args.file)
    if not result.converged:
        raise WindsolveError(f"{args.file}: the model did not converge ({result.message})")
    v_inf = result.summary.get("terminal_velocity")
    if (any(o.quantity == "terminal_velocity" for obs in objects.values() for o in obs)
            and (v_inf is None or not np.isfinite(v_inf.value))):
        raise WindsolveError(f"{args.file}: /summary has no terminal_velocity to compare "
                             f"with the observed one")
    settings = _line_settings(args)
    given = _line_kwargs(args)
    out = []
    for name, observations in objects.items():
        rows, _ = compare_result(result, observations, settings)
        used = [r for r in rows if np.isfinite(r[1])]
        if not used:
            why = "; ".join(f"{o.label()}: {UNDEFINED[o.quantity]}" for o, _, _ in rows)
            raise WindsolveError(f"{args.file}: the model predicts none of the measurements "
                                 f"of {name} ({why})")
        out.append((name, rows, used))
    needs_lines = any(o.quantity != "terminal_velocity" for obs in objects.values() for o in obs)
    print(f"{args.file} against {args.observed}")
    print("  " + (settings_text(settings, "command line" if given else "defaults")
                  if needs_lines else "line settings: none used (terminal_velocity only)"))
    for name, rows, used in out:
        chi2 = float(sum(z ** 2 for _, _, z in used))
        print(f"  {name}:")
        print(f"    {'quantity':<28s} {'observed [km/s]':>16s} {'model [km/s]':>13s} "
              f"{'residual [sigma]':>17s}")
        for o, p, z in rows:
            if np.isfinite(p):
                print(f"    {o.label():<28s} {o.value / 1e5:9.1f} ± {o.uncertainty / 1e5:<5.1f} "
                      f"{p / 1e5:13.1f} {z:17.2f}")
            else:
                print(f"    {o.label():<28s} {o.value / 1e5:9.1f} ± {o.uncertainty / 1e5:<5.1f} "
                      f"{'excluded':>13s}   ({UNDEFINED[o.quantity]})")
        print(f"    chi2 = {chi2:.3f} for {len(used)} of {len(rows)} measurements"
              + (f" ({len(rows) - len(used)} excluded: not predicted by this model)"
                 if len(used) < len(rows) else ""))
    name, rows, used = out[0]
    chi2 = float(sum(z ** 2 for _, _, z in used))
    if args.output is not None:
        from .io import write_csv
        write_csv(args.output, [["quantity", "line", "observed_km_s", "uncertainty_km_s",
                                 "model_km_s", "residual_sigma", "used"]]
                  + [[o.quantity, o.line, o.value / 1e5, o.uncertainty / 1e5,
                      p / 1e5 if np.isfinite(p) else "", z if np.isfinite(z) else "",
                      int(bool(np.isfinite(p)))]
                     for o, p, z in rows])
        print(f"wrote {args.output}")
    if args.plot is not None:
        from .plotting import plot_residuals
        plot_residuals(used, chi2, args.plot)
        print(f"wrote {args.plot}")
    return EXIT_OK


def _compare_grid(args, objects):
    import numpy as np

    from .observe import (
        compare_table,
        confidence_intervals,
        read_grid,
        settings_text,
        stored_settings,
        write_comparison_csv,
    )
    grid = read_grid(args.file)
    if args.plot is not None and grid.kind != "sweep":
        raise WindsolveError(f"--plot {args.plot}: draws a sweep's chi^2 map; a family has one "
                             f"axis: write its chi^2 with -o CSV instead")
    given = _line_kwargs(args)
    settings = stored_settings(grid, given)  # refuses options that would be ignored
    if len(objects) > 1 and (args.output is not None or args.plot is not None):
        raise WindsolveError(f"{args.observed} holds several objects ({', '.join(objects)}); "
                             f"choose one with --object to write -o or --plot")
    comparisons = {}
    for name, observations in objects.items():
        try:
            comparisons[name] = compare_table(grid.table, observations)
        except WindsolveError as error:
            raise WindsolveError(f"{args.file}: {error}; {grid.cannot_predict()}") from None
        c = comparisons[name]
        if not c.compared.any():
            why = "; ".join(c.reason_lines()) or "no converged row"
            raise WindsolveError(f"{args.file}: no row can be compared with {name} ({why})")
    axes = grid.axes
    names = [k for k, _, _, _ in axes]
    units = {k: unit for k, unit, _, _ in axes}
    values = {k: x for k, _, x, _ in axes}
    needs_lines = any(o.quantity != "terminal_velocity" for obs in objects.values() for o in obs)
    print(f"{args.file} ({grid.kind}) against {args.observed}")
    if settings is not None:
        print("  " + settings_text(settings, f"stored in the {grid.kind} file"))
    else:
        print("  line settings: none (" + ("no widths stored" if needs_lines
                                           else "terminal_velocity only") + ")")
    p = len(axes)
    for name, c in comparisons.items():
        print(f"  {name}: {c.counts()}")
        for line in c.reason_lines():
            print(f"    {line}")
        ok = c.compared
        chi2 = c.chi2
        best = np.argsort(np.where(ok, chi2, np.inf))[:min(5, int(ok.sum()))]
        nu = c.n_used - p
        print(f"    chi2_min = {chi2[best[0]]:.3f} at row {best[0]}; {c.n_used} measurements, "
              f"{p} free parameter{'s' if p != 1 else ''} (the axes: {', '.join(names)}), "
              + (f"{nu} degrees of freedom" if nu > 0 else
                 "no degrees of freedom left (a fit as exact as the grid allows is expected)"))
        print("    best rows:")
        for i in best:
            text = ", ".join(f"{k} = {values[k][i]:.5g}" + (f" {units[k]}" if units[k] else "")
                             for k in names)
            print(f"      row {i}: chi2 = {chi2[i]:.3f}  ({text})")
        print("    confidence ranges, one parameter of interest (Delta chi2 = 1, 4, 9):")
        for line in _range_lines(confidence_intervals(c, values, units, n_params=1), names):
            print(f"      {line}")
        if p >= 2:
            print("    joint region of two parameters (Delta chi2 = 2.30, 6.18, 11.8), "
                  "its extent:")
            for line in _range_lines(confidence_intervals(c, values, units, n_params=2),
                                     names):
                print(f"      {line}")
    c = next(iter(comparisons.values()))
    if args.output is not None:
        write_comparison_csv(args.output, c, [(k, units[k], values[k]) for k in names],
                             grid.table)
        print(f"wrote {args.output}")
    if args.plot is not None:
        from .observe import chi2_map, delta_chi2_level
        from .plotting import plot_chi2
        if len(grid.views) == 1:
            lo = float(np.nanmin(np.where(c.compared, c.chi2, np.nan)))
            regions = {"n_params": 1, "chi2_min": lo,
                       "levels": {s: lo + delta_chi2_level(1, s) for s in (1, 2, 3)}}
        else:
            regions = chi2_map(c, values[names[0]], values[names[1]])
        plot_chi2(grid.table, grid.views, np.where(c.compared, c.chi2, np.nan), args.plot,
                  regions)
        print(f"wrote {args.plot}")
    return EXIT_OK


def _range_lines(intervals, names):
    """One line per axis: its 1, 2 and 3 sigma ranges, then what they reach."""
    out = []
    for key in names:
        ivs = [iv for iv in intervals if iv.key == key]
        if not ivs:
            continue
        unit = f" {ivs[0].unit}" if ivs[0].unit else ""
        parts = ", ".join(f"{iv.sigma:g}σ {iv.low:.4g} to {iv.high:.4g}" for iv in ivs)
        reach = {}
        for iv in ivs:
            edge = [w for w, e in (("lowest", iv.at_low_edge), ("highest", iv.at_high_edge))
                    if e]
            if edge:
                reach.setdefault(" and ".join(edge), []).append(f"{iv.sigma:g}σ")
        notes = [f"{', '.join(sig)} reach{'es' if len(sig) == 1 else ''} the {edge} value "
                 f"swept: a limit there, widen the sweep" for edge, sig in reach.items()]
        if ivs[0].points == 1:
            notes.insert(0, "1σ narrower than the grid spacing")
        note = f"  ({'; '.join(notes)})" if notes else ""
        out.append(f"{key}: {parts}{unit}{note}")
    return out


def cmd_match(args: argparse.Namespace) -> int:
    """``windsolve match MODEL --key K --from A --to B --observed CSV``: fit one key.

    Varies the model key ``--key`` between ``--from`` and ``--to`` until the
    model reproduces the first ``--quantity`` measurement of the observed-widths
    file (see :func:`windsolve.observe.match_parameter`), and prints
    ``SOURCE: KEY = VALUE reproduces QUANTITY = OBSERVED ± SIGMA km/s (model
    PREDICTED)``.  Writes nothing.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    WindsolveError
        A bad model or observed-widths file, no measurement of ``--quantity``
        in it, a bad line option, or no value in the range that reproduces
        the measurement (ModelError).
    """
    from .observe import match_interval, read_observed
    model, source = _load(args.model)
    observations = [o for o in read_observed(args.observed, args.object)
                    if o.quantity == args.quantity]
    if not observations:
        raise WindsolveError(f"{args.observed}: no {args.quantity} measurement to match")
    o = observations[0]
    settings = _line_settings(args)
    m = match_interval(model, args.key, args.start, args.stop, o, settings)
    value, predicted = m["value"], m["predicted"]
    if o.quantity != "terminal_velocity":
        from .observe import settings_text
        print(settings_text(settings, "command line" if _line_option_kwargs(args)
                            else "defaults"))
    print(f"{source}: {args.key} = {value:.6g} reproduces {o.label()} = "
          f"{o.value / 1e5:.1f} ± {o.uncertainty / 1e5:.1f} km/s (model {predicted / 1e5:.2f})")
    low, high = m["low"], m["high"]
    lo_text = f"{low:.6g}" if low is not None else f"beyond {min(m['start'], m['stop']):.6g}"
    hi_text = f"{high:.6g}" if high is not None else f"beyond {max(m['start'], m['stop']):.6g}"
    note = ""
    if low is None or high is None:
        note = (f" (the range's models give {m['span'][0] / 1e5:.4g} to "
                f"{m['span'][1] / 1e5:.4g} km/s: observed ± sigma is not reached on the "
                f"open side; widen --from/--to)")
    print(f"  observed ± 1 sigma maps to {args.key} = {lo_text} to {hi_text}{note}")
    return EXIT_OK


def cmd_extract(args: argparse.Namespace) -> int:
    """``windsolve extract FILE (--row N | --best OBSERVED.csv) -o MODEL.toml``: one row's model.

    Writes one row of a sweep or family file -- row ``--row``, or the row of
    lowest chi^2 against ``--best``'s observations (``--object`` when it
    holds several) -- as a complete model file, which ``windsolve run``
    solves to the row's numbers (to rounding).  Prints ``row N (status)``,
    then ``wrote MODEL.toml``.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    WindsolveError
        A file that is no sweep or family file, no such row, neither or both
        of ``--row`` and ``--best``, a bad observations file, a file without
        its base model, or an unusable output path; nothing is written.
    """
    from .io import dumps, write_text
    from .observe import compare_table, read_grid, read_observed, row_model
    if (args.row is None) == (args.best is None):
        raise WindsolveError("give exactly one of --row N and --best OBSERVED.csv")
    if Path(args.output).suffix.lower() != ".toml":
        raise WindsolveError(f"-o {args.output}: a model file is written as .toml")
    _check_output(args.output, ".toml")
    grid = read_grid(args.file)
    if args.best is not None:
        c = compare_table(grid.table, read_observed(args.best, args.object))
        if not c.compared.any():
            raise WindsolveError(f"{args.file}: no row can be compared with {args.best}")
        row = c.best()
        note = f"lowest chi2 = {c.chi2[row]:.3f}"
    else:
        row = args.row
        note = ""
    model = row_model(grid, row)
    status = str(grid.table["status"][row])
    header = (f"# row {row} of {args.file} ({grid.kind}; status {status}"
              + (f"; {note}" if note else "") + "), written by windsolve extract\n")
    write_text(args.output, header + dumps(model.to_dict()))
    print(f"row {row} ({status}{'; ' + note if note else ''})")
    print(f"wrote {args.output}")
    return EXIT_OK


def cmd_inspect(args: argparse.Namespace) -> int:
    """``windsolve inspect FILE [--model] [--csv [OUT]] [--cgs]``: what a windsolve file holds.

    The file is first checked by the reader of its kind (result, family or
    sweep; :func:`windsolve.files.read_any_file`).  Prints the root attributes,
    the summary values, each profile quantity's length and range, each table
    column's range (and where a family ends), the critical points, and with
    ``--model`` the stored (resolved) model file.  Numbers are shown in the
    units the model or sweep file used for their physical type (else Msun/yr,
    km/s, Rsun, Lsun), or in cgs with ``--cgs``.  With ``--csv`` prints none
    of that, but exports the /table of a sweep or family file, or the profile
    of a result file, as CSV (each column's unit in its header;
    :func:`windsolve.tabular.export_csv`) to standard output, or to OUT
    followed by ``wrote OUT``.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    OutputError
        The file is missing, no windsolve file or damaged (one line naming
        what is wrong), or the CSV output cannot be written.
    """
    import numpy as np

    from .io import open_hdf5
    from .tabular import export_csv, read_table
    path = Path(args.file)
    if args.csv is not None:
        export_csv(path, args.csv, cgs=args.cgs, stream=sys.stdout)
        if args.csv != "-":
            print(f"wrote {args.csv}")
        return EXIT_OK
    table = read_table(path, cgs=args.cgs)  # checks the file: one line naming what is wrong
    kind = table.meta["file_kind"]
    with open_hdf5(path) as f:
        print(f"{path}")
        for key, value in f.attrs.items():
            if key in ("model_toml", "base_model_toml", "sweep_toml"):
                continue
            print(f"  {key}: {value}")
        model_toml = f.attrs.get("model_toml")
        stored = f.attrs.get("base_model_toml") if model_toml is None else model_toml
    if kind == "result":
        from ._units import chosen_units
        from .result import read_result
        result = read_result(path)
        pick = (lambda unit: unit) if args.cgs else chosen_units(result.model)
        print(f"summary ({result.status}):")
        for key, q in result.summary.items():
            shown = q.to(pick(q.unit))
            unit = shown.unit.to_string()
            print(f"  {key:<24s} {float(shown.value):.6g}{' ' + unit if unit else ''}")
        if len(table):
            print(f"profile: {len(table)} points")
        for name in table.colnames:
            _print_range(name, table[name], np)
        if result.critical_points:
            print("critical points:")
            for cp in result.critical_points:
                r = cp["radius"].to(pick(cp["radius"].unit))
                print(f"  r = {float(r.value):.6g} {r.unit.to_string()}  {cp['kind']}")
    else:
        extra = (f" (family along {table.meta['scan']})" if kind == "family" else "")
        print(f"table: {len(table)} rows{extra}")
        for name in table.colnames:
            _print_range(name, table[name], np)
        if table.meta.get("ends"):
            print(f"  {table.meta['ends']}")
    if args.model and stored is not None:
        print("model file (resolved):" if model_toml is not None else
              "base model file (resolved):")
        print(stored)
    return EXIT_OK


def _print_range(name, col, np):
    """One line of ``inspect``: a column's range and unit (numbers), or nothing for text."""
    unit = getattr(col, "unit", None)
    data = np.asarray(getattr(col, "value", col))
    if data.dtype.kind == "f":
        finite = data[np.isfinite(data)]
        rng = f"{finite.min():.6g} .. {finite.max():.6g}" if finite.size else "(no value)"
    elif data.dtype.kind == "b":
        rng = f"{int(data.sum())} of {data.size} true"
    else:
        rng = ""
    text = unit.to_string() if unit is not None else ""
    print(f"  {name:<26s} {rng:<30s} {'[' + text + ']' if text else ''}".rstrip())


def cmd_plot(args: argparse.Namespace) -> int:
    """``windsolve plot FILE [-o OUT]``: plot a result, family or sweep file.

    A result file's profiles, a family's quantities against the photosphere
    radius, or a sweep's table, as the file's kind says; written to ``-o`` (PNG,
    PDF or SVG by its suffix; default FILE with ``.png``), then prints
    ``wrote OUT``.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    WindsolveError
        The file is missing, no windsolve file or damaged, or the image cannot
        be written (OutputError).
    """
    from .io import hdf5_kind
    from .plotting import plot_profile
    from .result import WindResult
    out = Path(args.output) if args.output else Path(args.file).with_suffix(".png")
    kind = hdf5_kind(args.file)  # one line if it is no windsolve file
    family, sweep = kind == "family", kind == "sweep"
    _check_output(out, ".png")
    if sweep:
        from .plotting import plot_sweep
        plot_sweep(args.file, out)
        print(f"wrote {out}")
        return EXIT_OK
    if family:
        from .family import FamilyResult, plot_family
        plot_family(FamilyResult.from_hdf5(args.file), out)
        print(f"wrote {out}")
        return EXIT_OK
    result = WindResult.from_hdf5(args.file)
    plot_profile(result, out)
    print(f"wrote {out}")
    return EXIT_OK


TABULATE_LOG_T = ("3.8", "7.0", "65")  # 0.05 dex in log10 T
TABULATE_LOG_R = ("-8.0", "1.0", "19")  # 0.5 dex in log10 R


def _whole_number(text):
    """int of "20", "1e8" or "20.0"; ValueError for anything else."""
    try:
        return int(text)
    except ValueError:
        value = float(text)
        if not (math.isfinite(value) and value == int(value)):
            raise ValueError(text) from None
        return int(value)


def _count(text):
    """argparse type of a count option: a whole number ("1e3" too)."""
    try:
        return _whole_number(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"\"{text}\" is not a whole number") from None


def _seconds(text):
    """argparse type of a duration option: a number of seconds >= 0."""
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not (value >= 0 and math.isfinite(value)):
        raise argparse.ArgumentTypeError(f"\"{text}\" is not a number of seconds >= 0")
    return value


def _grid_option(values, option):
    from .tables import MAX_LOG_T, grid
    start, stop, num = values
    try:
        start, stop = float(start), float(stop)
    except ValueError:
        raise WindsolveError(f"{option} START STOP NUM: START and STOP must be numbers "
                             f"(got \"{values[0]}\", \"{values[1]}\")") from None
    if option == "--log-t" and stop > MAX_LOG_T:
        raise WindsolveError(f"{option} START STOP NUM: STOP = {values[1]} is not a log10 "
                             f"temperature; give log10 T [K], e.g. 7.0")
    try:
        num = _whole_number(num)
    except ValueError:
        raise WindsolveError(f"{option} START STOP NUM: NUM must be a whole number "
                             f"(got \"{values[2]}\")") from None
    return grid(start, stop, num, option)


def cmd_tabulate(args: argparse.Namespace) -> int:
    """``windsolve tabulate MODEL -o TABLE``: tabulate a model's opacity law.

    Evaluates the model's analytic opacity law (with its X and Z) on the grid
    of ``--log-t`` (log10 T [K]) and ``--log-r`` (log10 R, R = rho / (T / 1e6
    K)^3 with rho in g/cm^3) nodes and writes it as an opacity table: HDF5 for
    ``.h5``/``.hdf5``, else the text matrix, its description naming the command
    that made it.  Unless ``-q``, prints ``wrote TABLE: LAW law, N log10 T x M
    log10 R``.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0).

    Raises
    ------
    WindsolveError
        A bad model or output path, a grid whose START and STOP are not
        numbers or NUM not a whole number, a ``--log-t`` STOP that is no log10
        temperature, a grid :func:`windsolve.tables.grid` refuses (START not
        below STOP, too few nodes), or more nodes than a table may have.
    """
    from .tables import HDF5_SUFFIXES, MAX_TABLE_NODES, TEXT_LAYOUT, tabulate, write_table
    model, source = _load(args.model)
    _check_output(args.output, ".txt")
    log_T = _grid_option(args.log_t, "--log-t")
    log_R = _grid_option(args.log_r, "--log-r")
    if log_T.size * log_R.size > MAX_TABLE_NODES:
        raise WindsolveError(f"--log-t and --log-r: {log_T.size} x {log_R.size} = "
                             f"{log_T.size * log_R.size} nodes is more than the "
                             f"{MAX_TABLE_NODES} a table may have; use fewer nodes")
    table = tabulate(model.opacity, log_T, log_R, model.X, model.Z)
    description = (f"Made with: windsolve tabulate {source} -o {Path(args.output).name} "
                   f"--log-t {' '.join(args.log_t)} --log-r {' '.join(args.log_r)}",
                   *table.description)
    if Path(args.output).suffix.lower() in HDF5_SUFFIXES:
        description = tuple(s for s in description if s not in TEXT_LAYOUT)
    table = type(table)(table.log_T, table.log_R, table.log_kappa, description)
    write_table(table, args.output)
    if not args.quiet:
        print(f"wrote {args.output}: {model.opacity.law} law, {log_T.size} log10 T x "
              f"{log_R.size} log10 R")
    return EXIT_OK


class _Parser(argparse.ArgumentParser):
    """argparse with the project's one-line errors: ``windsolve: error: ...``, exit 2."""

    def error(self, message):
        from .opacity import nearest
        choice = re.match(r"argument (.+?): invalid choice: '(.*)' \(choose from (.*)\)$",
                          message)
        if choice:
            name, value, choices = choice.groups()
            options = [c.strip().strip("'") for c in choices.split(",")]
            message = (f"unknown command \"{value}\"" if name == "COMMAND" else
                       f"{name} \"{value}\" is not a choice")
            message += f"{nearest(value, options)}; choose one of {', '.join(options)}"
        dashed = re.match(r"argument (\S+?)(/\S+)?: expected one argument$", message)
        if dashed:
            message += (f"; a value that starts with '-' is written {dashed.group(1)}=VALUE, "
                        f"e.g. {dashed.group(1)}=-1")
        command = self.prog.partition(" ")[2]
        if not command and message.startswith("unrecognized arguments"):
            # Raised by the top parser for a command's stray argument: name that command.
            commands = getattr(self, "commands", ())
            given = [a for a in getattr(self, "argv", None) or () if a in commands]
            command = given[0] if given else ""
        where = f"{command}: " if command else ""
        self.exit(EXIT_BAD_INPUT, f"windsolve: error: {where}{message} (see windsolve "
                                  f"{command + ' ' if command else ''}--help)\n")


def cmd_fit(args: argparse.Namespace) -> int:
    """``windsolve fit FIT.toml -o CHAIN.h5``: sample the posterior of a fit file with emcee.

    Validates the fit file whole (nothing runs or is written on bad input),
    samples, checkpointing every saved step to ``CHAIN.h5.partial``
    (``--resume`` continues an interrupted fit to the same chain), writes
    the chain, then prints the statuses of the models solved, the
    acceptance fraction, autocorrelation times and effective sample sizes
    (and a warning with the steps still needed when the chain is too
    short), and the median and 16/84 and 2.5/97.5 percentiles of every free
    key and derived quantity.  ``--best`` writes the maximum-posterior model.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed command line (see :func:`build_parser`).

    Returns
    -------
    int
        EXIT_OK (0), or 130 when interrupted (the journal kept for --resume).

    Raises
    ------
    WindsolveError
        A bad fit file or option, an unusable output path, a journal without
        ``--resume`` or of another fit file.
    """
    from .fit import best_model, load_fit, run_fit, summary_table
    if args.workers < 1:
        raise WindsolveError("--workers must be at least 1")
    _check_output(args.output, ".h5")
    for path, ext in ((args.best, ".toml"), (args.corner, ".png"), (args.predictive, ".png")):
        if path is not None:
            _check_output(path, ext)
    if args.corner is not None:
        try:
            import corner  # noqa: F401 -- before sampling, not after
        except ImportError:
            raise WindsolveError("--corner needs the corner package: pip install "
                                 "\"windsolve[plots]\"") from None
    spec = load_fit(args.fit)
    if not args.quiet:
        print(f"{args.fit}: {spec.ndim} free keys ({', '.join(spec.keys)}), "
              f"{len(spec.observations)} observations, {spec.walkers} walkers x "
              f"{spec.steps} steps (seed {spec.seed})")
    run = run_fit(spec, args.output, workers=args.workers, scheduler=args.scheduler,
                  resume=args.resume, quiet=args.quiet)
    if run.interrupted:
        print(f"windsolve: interrupted after {run.steps} saved steps, kept in "
              f"{args.output}.partial; resume with: windsolve fit {args.fit} -o "
              f"{args.output} --resume", file=sys.stderr)
        return 130
    if args.best is not None:
        from .io import write_text
        from .modelfile import dumps
        write_text(args.best, dumps(best_model(args.output).to_dict()))
    from .fit import corner_plot, predictive_plot
    if args.corner is not None:
        corner_plot(args.output, args.corner, derived=True)
    if args.predictive is not None:
        predictive_plot(args.output, args.predictive)
    if not args.quiet:
        print("  models: " + ", ".join(f"{k}: {v}" for k, v in sorted(run.statuses.items())))
        print(f"  acceptance fraction {run.acceptance.mean():.3f} (walkers "
              f"{run.acceptance.min():.3f} to {run.acceptance.max():.3f})")
        for key, tau, ess in zip(spec.keys, run.tau, run.ess, strict=True):
            print(f"  {key}: autocorrelation time {tau:.3g} saved steps, effective sample "
                  f"size {ess:.0f}")
        if run.warning:
            print(f"  warning: {run.warning}")
        table = summary_table(args.output)
        print(f"  {'quantity':<22} {'median':>12} {'16%':>12} {'84%':>12} {'2.5%':>12} "
              f"{'97.5%':>12}  unit")
        for row in table:
            print(f"  {row['quantity']:<22} " + " ".join(
                f"{row[c]:12.5g}" for c in ("median", "p16", "p84", "p2.5", "p97.5"))
                + f"  {row['unit']}")
        written = [p for p in (args.output, args.best, args.corner, args.predictive) if p]
        print(f"wrote {', '.join(written)}")
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    """The command-line parser of ``windsolve`` and all its commands.

    Returns
    -------
    argparse.ArgumentParser
        Errors end with one line on stderr and exit status 2; each command's
        parsed arguments carry the ``cmd_*`` function that runs it as ``func``,
        and the parser's ``commands`` attribute lists the command names.
    """
    from ._version import __version__
    from .family import MAX_MEMBERS
    from .observe import QUANTITIES
    parser = _Parser(prog="windsolve", description=DESCRIPTION)
    parser.add_argument("--version", action="version", version=f"windsolve {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser("run", help="solve one model and print its summary",
                       description="Solve one model file (the built-in demo when none is "
                                   "given). Exit 0: converged; 2: bad input or no solution "
                                   "(nothing written); 3: the flow stops before the outer "
                                   "radius (file written, status says where).")
    p.add_argument("model", nargs="?", help="model file (TOML); default: the built-in demo")
    p.add_argument("-o", "--output", metavar="OUT.h5", help="write the result to this HDF5 file")
    p.add_argument("--set", action="append", metavar="SECTION.KEY=VALUE",
                   help="change one key of the model file for this run, the value as a model "
                        "file writes it (repeatable), e.g. --set star.luminosity=\"3e6 Lsun\" "
                        "--set numerics.rtol=1e-9")
    p.add_argument("-q", "--quiet", action="store_true", help="print nothing on success")
    p.set_defaults(func=cmd_run)

    p = sub.add_parser("check", help="validate a model and print the derived numbers",
                       description="Validate a model file and print mu, kappa_es, the "
                                   "Eddington luminosity, Gamma at the base, the escape "
                                   "speed and the expected sonic radius, without solving.")
    p.add_argument("model", nargs="?", help="model file (TOML); default: the built-in demo")
    p.add_argument("--plot", metavar="OUT.png",
                   help="draw kappa and Gamma along the temperatures the wind crosses "
                        "(diffusion models)")
    p.add_argument("--set", action="append", metavar="SECTION.KEY=VALUE",
                   help="change one key of the model file (repeatable), as for run")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("inspect", help="print what a result file holds",
                       description="Print the attributes, summary, profile datasets "
                                   "(with units) and critical points of a result file.")
    p.add_argument("file", help="HDF5 result file")
    p.add_argument("--model", action="store_true", help="also print the stored model file")
    p.add_argument("--csv", nargs="?", const="-", metavar="FILE",
                   help="export the /table of a sweep or family file, or the profile of a "
                        "result file, as CSV with units in the header (to FILE, or "
                        "standard output)")
    p.add_argument("--cgs", action="store_true",
                   help="numbers in cgs, not in the units the model or sweep file used")
    p.set_defaults(func=cmd_inspect)

    p = sub.add_parser("plot", help="plot the profiles of a result file",
                       description="Plot velocity, density, Eddington factor and luminosity "
                                   "against radius, with the sonic point marked.")
    p.add_argument("file", help="HDF5 result file")
    p.add_argument("-o", "--output", metavar="OUT.png",
                   help="image file (PNG, PDF or SVG); default: FILE with .png")
    p.set_defaults(func=cmd_plot)

    p = sub.add_parser("lines", help="synthetic line profile and its measured widths",
                       description="Compute an optically thin emission line (or, with "
                                   "--pcygni, a Sobolev P Cygni resonance line) from a solved "
                                   "profile in any HDF5 file laid out like windsolve's, and "
                                   "print its FWHM, HWZI and blue-edge velocity.")
    p.add_argument("file", help="a result file, or a sweep or family file with --row")
    p.add_argument("--row", type=int, metavar="N",
                   help="of a sweep or family file: the row whose model to solve and use")
    p.add_argument("-o", "--output", metavar="profile.csv|profile.png",
                   help="write the profile as CSV (velocity in km/s, normalised flux) or plot it")
    p.add_argument("--pcygni", action="store_true",
                   help="a P Cygni resonance line (Sobolev approximation) instead of emission")
    _add_line_options(p)
    p.set_defaults(func=cmd_lines)

    p = sub.add_parser("compare", help="compare a model or a sweep with observed widths",
                       description="Predicted against observed widths (observed-widths CSV): "
                                   "for one model, residuals in sigma and chi^2; for a sweep "
                                   "file, chi^2 per model, the best models and a chi^2 map.")
    p.add_argument("file", help="a result, family or sweep file (HDF5)")
    p.add_argument("observed", help="observed-widths CSV (object,quantity,line,value,"
                                    "uncertainty,unit)")
    p.add_argument("--object", help="which object of the CSV (when it holds several)")
    p.add_argument("-o", "--output", metavar="chi2.csv", help="write the comparison as CSV")
    p.add_argument("--plot", metavar="chi2.png", help="plot residuals or the chi^2 map")
    _add_line_options(p)
    p.set_defaults(func=cmd_compare)

    p = sub.add_parser("match", help="find the value of one model key that fits an observation",
                       description="Vary one model key between --from and --to (a scan, then "
                                   "Brent's method over full solves) until the model reproduces "
                                   "one observed quantity, or say that no value in the range "
                                   "can.")
    p.add_argument("model", help="model file (TOML)")
    p.add_argument("--key", required=True, help="dotted model key, e.g. star.luminosity")
    p.add_argument("--from", dest="start", required=True, metavar="VALUE",
                   help="one end of the range, with its unit, e.g. \"2e6 Lsun\"")
    p.add_argument("--to", dest="stop", required=True, metavar="VALUE",
                   help="the other end, same dimension")
    p.add_argument("--observed", required=True, help="observed-widths CSV")
    p.add_argument("--quantity", default="terminal_velocity",
                   choices=QUANTITIES,
                   help="which observed quantity to match (default terminal_velocity)")
    p.add_argument("--object", help="which object of the CSV (when it holds several)")
    _add_line_options(p)
    p.set_defaults(func=cmd_match)

    p = sub.add_parser("extract", help="write one row of a sweep or family as a model file",
                       description="Write one row of a sweep or family file (--row N, or the "
                                   "row of lowest chi^2 against --best's observations) as a "
                                   "complete model file that `windsolve run` solves to the "
                                   "row's numbers.")
    p.add_argument("file", help="a sweep or family file (HDF5)")
    p.add_argument("--row", type=int, metavar="N", help="the row (0-based, as compare prints)")
    p.add_argument("--best", metavar="OBSERVED.csv",
                   help="the row of lowest chi^2 against this observed-widths CSV")
    p.add_argument("--object", help="which object of the CSV (when it holds several)")
    p.add_argument("-o", "--output", required=True, metavar="model.toml",
                   help="the model file to write")
    p.set_defaults(func=cmd_extract)

    p = sub.add_parser("sweep", help="run a parameter sweep (locally or on a dask cluster)",
                       description="Run every model of a sweep file (grid, random or Latin "
                                   "hypercube design).  Finished models are journaled as they "
                                   "finish (OUT.h5.partial); a killed sweep resumes with "
                                   "--resume.  Locally a process pool (default: all cores); "
                                   "with --scheduler an existing dask.distributed cluster.")
    p.add_argument("sweep", help="sweep file (TOML)")
    p.add_argument("-o", "--output", required=True, metavar="OUT.h5", help="HDF5 output")
    p.add_argument("--workers", type=int, metavar="N",
                   help="local worker processes (default: all cores)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on the dask.distributed scheduler at ADDRESS (tcp://host:port "
                        "or tls://host:port)")
    p.add_argument("--resume", action="store_true",
                   help="finish an interrupted sweep: run only the models not yet done")
    p.add_argument("--profiles", action="store_true",
                   help="also store every model's profile (large files)")
    p.add_argument("--stall-timeout", type=_seconds, default=600.0, metavar="SECONDS",
                   help="stop (exit 2, finished models kept for --resume) when no model has "
                        "finished for this long, e.g. a dask cluster without workers "
                        "(default 600; 0: wait for ever)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar or summary")
    p.set_defaults(func=cmd_sweep)

    p = sub.add_parser("family", help="solve a family of photosphere-anchored diffusion winds",
                       description="Keep the photosphere luminosity of a photosphere-anchored "
                                   "diffusion model and scan the effective temperature, the "
                                   "photosphere radius or the mass-loss rate: each member is a "
                                   "full solve.  Prints the table, says where the family ends "
                                   "and why, and writes HDF5 and a plot on request.")
    p.add_argument("model", help="model file (model = \"diffusion\", photosphere anchor)")
    p.add_argument("--scan", required=True,
                   choices=["photosphere_temperature", "photosphere_radius", "mass_loss_rate",
                            "base_luminosity", "base_radius"],
                   help="quantity to scan (units: K, Rsun, Msun/yr; a base-anchored model: "
                        "base_luminosity in Lsun or base_radius in Rsun)")
    p.add_argument("--from", dest="start", required=True, metavar="START",
                   help="first value of the scan: a number in the scan's unit, or a value "
                        "with a unit (\"2e4 K\")")
    p.add_argument("--to", dest="stop", required=True, metavar="STOP",
                   help="last value of the scan, the same way")
    p.add_argument("--num", type=_count, default=20,
                   help=f"number of members (log-spaced; default 20, at most {MAX_MEMBERS})")
    p.add_argument("-o", "--output", metavar="FAMILY.h5", help="write the table to HDF5")
    p.add_argument("--profiles", action="store_true",
                   help="also store each member's profile in the HDF5 file")
    p.add_argument("--plot", metavar="FAMILY.png",
                   help="plot Mdot, v_inf, T_eff and the base temperature against R_ph")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar or table")
    p.set_defaults(func=cmd_family)

    p = sub.add_parser("tabulate", help="tabulate a model's opacity law for the table law",
                       description="Evaluate the analytic opacity law of a model file "
                                   "(with its X and Z; porosity is not part of the law) on "
                                   "a grid of log10 T and log10 R, R = rho / (T / 1e6 K)^3, "
                                   "and write it as an opacity table that [opacity] "
                                   "law = \"table\" reads. Exit 2 with one line and "
                                   "nothing written on bad input.")
    p.add_argument("model", help="model file (TOML) whose [opacity] law is tabulated")
    p.add_argument("-o", "--output", required=True, metavar="TABLE.txt|TABLE.h5",
                   help="table file to write: HDF5 for .h5/.hdf5, else the text matrix")
    p.add_argument("--log-t", nargs=3, metavar=("START", "STOP", "NUM"),
                   default=TABULATE_LOG_T,
                   help="NUM evenly spaced log10 T [K] nodes from START to STOP "
                        f"(default: {' '.join(TABULATE_LOG_T)}; NUM >= 4)")
    p.add_argument("--log-r", nargs=3, metavar=("START", "STOP", "NUM"),
                   default=TABULATE_LOG_R,
                   help="NUM evenly spaced log10 R nodes from START to STOP, "
                        "R = rho / (T / 1e6 K)^3 in g/cm3 "
                        f"(default: {' '.join(TABULATE_LOG_R)}; NUM >= 4)")
    p.add_argument("-q", "--quiet", action="store_true", help="print nothing on success")
    p.set_defaults(func=cmd_tabulate)
    p = sub.add_parser("fit", help="posterior of model keys given observed widths (emcee)",
                       description="Sample the posterior of the free keys of a fit file "
                                   "(priors, observed widths) with emcee's ensemble sampler; "
                                   "every saved step is checkpointed (OUT.h5.partial), and a "
                                   "killed fit resumes with --resume to the same chain.")
    p.add_argument("fit", help="fit file (TOML)")
    p.add_argument("-o", "--output", required=True, metavar="CHAIN.h5", help="HDF5 output")
    p.add_argument("--workers", type=int, default=1, metavar="N",
                   help="local processes solving the walkers' models (default 1: in this "
                        "process, fastest for the isothermal model)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="solve on the dask.distributed scheduler at ADDRESS (each half-ensemble in "
                        "--workers tasks, default 8)")
    p.add_argument("--resume", action="store_true", help="continue an interrupted fit")
    p.add_argument("--best", metavar="BEST.toml",
                   help="also write the maximum-posterior model as a model file")
    p.add_argument("--corner", metavar="IMAGE",
                   help="also draw the corner plot of the posterior (needs windsolve[plots])")
    p.add_argument("--predictive", metavar="IMAGE",
                   help="also draw each observation against its posterior predictions")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar or summary")
    p.set_defaults(func=cmd_fit)

    parser.commands = list(sub.choices)
    return parser


def main(argv: "list[str] | None" = None) -> int:
    """Run the ``windsolve`` command line.

    Parameters
    ----------
    argv : list of str, optional
        The arguments after the program name; ``sys.argv[1:]`` when None.

    Returns
    -------
    int
        The exit status: 0 on success (also after ``--help``, ``--version``,
        or when a reader of the output stopped early, a broken pipe); 2 for
        a bad command line, no command, or any WindsolveError of the command
        (printed as one ``windsolve: error: ...`` line on stderr); 3 for a
        ``run`` whose solution stops before the outer radius; 130 when
        interrupted (Ctrl-C).
    """
    parser = build_parser()
    parser.argv = list(sys.argv[1:] if argv is None else argv)
    try:
        args = parser.parse_args(argv)
    except SystemExit as done:  # --help, --version, or the one line of _Parser.error
        return done.code
    if args.command is None:
        print(f"windsolve: error: give a command, one of {', '.join(parser.commands)} "
              f"(see windsolve --help)", file=sys.stderr)
        return EXIT_BAD_INPUT
    try:
        return args.func(args)
    except WindsolveError as error:
        print(f"windsolve: error: {error}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("windsolve: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # Output piped into e.g. `head`, which stopped reading: not an error.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return EXIT_OK


if __name__ == "__main__":
    sys.exit(main())
