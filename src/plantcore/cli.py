"""Command line: ``plantcore inspect|reduce|compare|report|demo|audit|sweep``.

This module only parses arguments, calls the library and prints or writes what the result
objects render; there are no numerics here.  Bad input (a ``ValueError`` from the library,
including :class:`plantcore.ModelFileError`) prints one line on stderr and exits 2; no
traceback is shown and no output file is left behind.
"""

from __future__ import annotations

import argparse
import sys

from plantcore.commands import COMMAND_MODULES
from plantcore.core.errors import NumericalBreakdown

__all__ = ["main"]

EXIT_OK = 0
EXIT_NOT_EQUIVALENT = 1
EXIT_HIDDEN_UNSTABLE = 1   # reduce: a removed mode is not stable and was not acknowledged
EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3
EXIT_UNDECIDED = 4         # compare, reduce: undecided at the attainable accuracy
EXIT_SPURIOUS = 1          # audit: the linearized model sees a direction the system cannot
EXIT_TERMINATED = 143      # SIGTERM (128 + 15), after temporaries and partial folders are removed

_ACKNOWLEDGE = "--accept-hidden-unstable"

_REDUCE_EXIT_CODES = (
    "exit codes: 0 the reduced model was written; 1 the minimal realization removed a mode "
    f"that is unstable or on the stability boundary (a WARNING line on stderr names it) and "
    f"{_ACKNOWLEDGE} was not given, so nothing was written, or the written minimal "
    "realization is NOT EQUIVALENT to the model (a WARNING line says so); 2 bad input; 3 numerical "
    f"breakdown; 4 the model was written but the certificate of the minimal realization is "
    f"UNDECIDED (a difference above the tolerance that rounding may explain). With "
    f"{_ACKNOWLEDGE} the model is written, the WARNING is still printed and the exit code is "
    "0 (or 4).")

_COMPARE_EXIT_CODES = (
    "exit codes: 0 EQUIVALENT (within the tolerance, or to the attainable accuracy that "
    "floating point can reach for the two models); 1 NOT EQUIVALENT (a difference above the "
    "tolerance and clearly above rounding, or models that cannot be compared); 2 bad input; "
    "3 numerical breakdown; 4 UNDECIDED (a difference above the tolerance and the attainable "
    "accuracy, but not clearly above rounding).")


_TOL_HELP = ("relative rank tolerance (default 5e-11 of the model's scale, 20 n eps above "
             "11,000 states; see the README's 'Trust of the rank decisions')")
_EXIT_CODES = {
    "inspect": "exit codes: 0 analysed (read the verdicts); 2 bad input; 3 numerical breakdown.",
    "report": "exit codes: 0 report written; 2 bad input or refused output; 3 numerical "
              "breakdown.",
    "audit": "exit codes: 0 consistent (no expected unobservable direction is seen); 1 "
             "SPURIOUS OBSERVABILITY (the linearized model sees a direction the real system "
             "cannot; the report is still written); 2 bad input; 3 numerical breakdown.",
    "sweep": "exit codes: 0 swept (points that failed are listed in the table); 2 bad input; "
             "3 numerical breakdown.",
    "demo": "exit codes: 0 demo completed; 2 bad input or refused folder; 3 numerical "
            "breakdown.",
}


class _UsageError(Exception):
    """Raised by the argument parser instead of printing usage and exiting."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, handled in main()
        raise _UsageError(f"{self.prog}: {message}")


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


_FORCE = "--force"
_OVERWRITE_POLICY = (
    "An existing output file is kept: the command refuses it before computing anything "
    f"unless {_FORCE} is given. Character devices (such as /dev/null) and named pipes are "
    "written into, never replaced; an input file is never overwritten, even with "
    f"{_FORCE}.")


def _check_output_first(path, *, inputs, force: bool, suffixes, kind: str,
                        suffix_selects_format: bool = False) -> None:
    """Refuse a bad output before any computation: its suffix, an existing file, the folder.

    A character device or named pipe (``-o /dev/null``) needs no suffix unless the suffix
    selects the format (model files); safe_write refuses the other non-regular targets.

    The write itself is made with ``overwrite=force`` as well, so a file that appears while
    the command computes is not replaced either.
    """
    import os

    from plantcore.files import check_output_path

    name = os.fsdecode(os.fspath(path))
    suffix = os.path.splitext(name)[1].lower()
    is_stream = os.path.exists(name) and not os.path.isfile(name) and not os.path.isdir(name)
    if suffix not in suffixes and not (is_stream and not suffix_selects_format):
        shown = f"the suffix {suffix!r}" if suffix else "no suffix"
        raise ValueError(f"{name}: output: {shown} is not one of {', '.join(suffixes)} "
                         f"(the {kind} is chosen by the suffix).")
    check_output_path(name, inputs=inputs, overwrite=True)  # inputs, folders, devices
    if not force and os.path.isfile(name):
        raise ValueError(f"{name}: output: already exists; plantcore keeps existing files "
                         f"(give {_FORCE} to replace it, or choose another name).")


def _add_force(parser) -> None:
    parser.add_argument(_FORCE, action="store_true", dest="force",
                        help="replace an existing output file (never an input file)")


_FOLDER_POLICY = (
    "An existing, non-empty output folder is kept: the command refuses it before computing "
    f"anything unless {_FORCE} is given. With {_FORCE} the folder is replaced whole, and only "
    "when it holds nothing but files this command writes (an earlier run's output); a folder "
    "holding any other file, a subfolder, a symbolic link or an input file is refused. The "
    "new folder is written under a hidden name next to it first, and the old one is put back "
    "if the replacement fails or is interrupted.")


def _add_folder_force(parser, owner: str) -> None:
    parser.add_argument(_FORCE, action="store_true", dest="force",
                        help=f"replace an existing folder whole when it holds only {owner}'s "
                             "own files (default: a non-empty folder is refused)")


# --- subcommands -----------------------------------------------------------------------------
# Each handler takes the parsed arguments and returns an exit code.  Handlers live here only
# as thin glue; numerics and formatting belong to the library and report modules.

def _cmd_inspect(args) -> int:
    import json

    from plantcore.analysis.analyze import analyze
    from plantcore.files import load_model

    model = load_model(args.model)
    if model.is_sparse:  # structural verdicts and low-rank Gramians (issue 18)
        from plantcore.commands.sparse_models import inspect_sparse

        return inspect_sparse(args, model)
    from plantcore.analysis.analyze import ANALYSIS_STAGES
    from plantcore.commands.progress_option import stages

    # the analysis names its stages; the line shows the time spent in each
    with stages("inspect", args, len(ANALYSIS_STAGES) + 1) as bar:
        analysis = analyze(model, tol=args.tol, progress=bar.step)
        bar.step("formatting")
    if args.format == "json":
        print(json.dumps(analysis.to_dict(), indent=2, allow_nan=False))
    elif args.format == "markdown":
        print(analysis.to_markdown(), end="")
    else:
        print(analysis.to_text(), end="")
    return EXIT_OK


def _cmd_reduce(args) -> int:
    from plantcore.commands.progress_option import stages
    from plantcore.files import load_model
    from plantcore.files.layout import MODEL_FILE_SUFFIXES

    _check_output_first(args.output, inputs=(args.model,), force=args.force,
                        suffixes=MODEL_FILE_SUFFIXES, kind="model file format",
                        suffix_selects_format=True)
    model = load_model(args.model)
    if model.is_sparse:  # structural pre-reduction and low-rank balanced truncation (issue 18)
        from plantcore.commands.sparse_models import reduce_sparse

        return reduce_sparse(args, model)
    truncate = args.order is not None or args.max_error is not None
    # what the command prints waits until the progress line is closed, so that the two
    # never share a line of the terminal
    lines = []
    bar = stages("reduce", args, 4 if truncate else 2)
    try:
        return _reduce_dense(args, model, bar, truncate,
                             lambda text="", err=False: lines.append((text, err)))
    finally:
        bar.close()
        for text, err in lines:
            print(text, file=sys.stderr if err else sys.stdout)


def _reduce_dense(args, model, bar, truncate: bool, say) -> int:
    from plantcore.files import save_model
    from plantcore.files.written_zeros import (
        a_priori_backward_error,
        clear_rounding_dust,
        reduction_backward_error,
    )
    from plantcore.reports.text import shown_removed_modes
    from plantcore.structure.minimal import minimal_realization
    from plantcore.structure.removed_modes import hidden_mode_message

    bar.step(f"minimal realization of {model.n} states")
    minimal = minimal_realization(model, tol=args.tol)
    # rounding dust within the reduction's backward error is written as exact zeros, and
    # the certificate below is run on what is written
    written = clear_rounding_dust(minimal.model, reduction_backward_error(minimal, model.n),
                                  reference=model)
    reduced = written.model
    say(f"minimal realization: {model.n} -> {minimal.order} states "
          f"({minimal.removed_uncontrollable} uncontrollable and "
          f"{minimal.removed_unobservable} unobservable removed)")
    if minimal.fragile:
        say("warning: a rank decision lies within a factor 100 of the tolerance; "
              "the order depends on the tolerance.")
    if truncate:
        from plantcore.reduction.balanced import balanced_truncation, truncation_error

        bar.step(f"balanced truncation of {reduced.n} states")
        truncated = balanced_truncation(reduced, order=args.order, max_error=args.max_error)
        written = clear_rounding_dust(truncated.model, a_priori_backward_error(reduced.n),
                                      reference=model)
        reduced = written.model
        bar.step("measured error (peak gain of original - reduced)")
        measured = truncation_error(model, reduced)
        kept = (f"; {truncated.unstable_order} unstable kept unreduced"
                if truncated.unstable_order else "")
        say(f"balanced truncation: {truncated.original_order} -> {truncated.order} states"
              f"{kept}")
        say(f"error bound (2 x sum of discarded Hankel singular values): "
              f"{truncated.error_bound:.6g}")
        unit = "rad/sample" if reduced.is_discrete else "rad/s"
        say(f"measured error (peak gain of original - reduced): {measured.value:.6g} "
              f"at {measured.frequency:.6g} {unit}")
    removed = minimal.removed_unstable_modes
    if removed:
        shown = shown_removed_modes(removed, model)
        say("WARNING: " + _one_line(hidden_mode_message(shown, "the minimal realization")),
            err=True)
        if not args.accept_hidden_unstable:
            say(f"plantcore reduce: {args.output} was not written; give {_ACKNOWLEDGE} to "
                  "write the reduced model anyway (exit 1).", err=True)
            return EXIT_HIDDEN_UNSTABLE
    save_model(reduced, args.output, inputs=(args.model,), overwrite=args.force)
    say(f"reduced model written to {args.output}")
    if written.cleared:
        say("  " + written.describe())
    from plantcore.reduction.equivalence import check_equivalence

    say()
    if truncate:
        say("The certificate below compares the truncated model with the original; a "
              "truncation removes real dynamics, so 'not equivalent' is expected and the "
              "peak error is what to judge against the bound.")
    bar.step("certificate of the written model")
    certificate = check_equivalence(model, reduced)
    say(certificate.to_text(labels=(args.model, args.output)))
    if certificate.verdict == "undecided" and not truncate:
        return EXIT_UNDECIDED
    if certificate.verdict == "not equivalent" and not truncate:
        say("WARNING: the written minimal realization is NOT EQUIVALENT to the model; do not "
              "use it (exit 1).", err=True)
        return EXIT_NOT_EQUIVALENT
    return EXIT_OK


# --- compare ---
def _cmd_compare(args) -> int:
    from plantcore.commands.progress_option import stages
    from plantcore.files import load_model
    from plantcore.reduction.equivalence import check_equivalence

    first = load_model(args.model_a)
    second = load_model(args.model_b)
    # the exact comparison draws its own line (Markov parameters) over this one, so this
    # line is not redrawn meanwhile
    with stages("compare", args, 1, ticking=not args.exact) as bar:
        bar.step("certificate" + (": floating point, then exact" if args.exact else ""))
        certificate = check_equivalence(first, second, tol=args.tol, exact=args.exact)
    print(certificate.to_text(labels=(args.model_a, args.model_b)))
    if certificate.verdict == "undecided":
        return EXIT_UNDECIDED
    return EXIT_OK if certificate.equivalent else EXIT_NOT_EQUIVALENT


# --- report ---
_HTML_SUFFIXES = (".html", ".htm")


def _cmd_report(args) -> int:
    from plantcore.files import load_model
    from plantcore.reports.html import write_html_report

    _check_output_first(args.output, inputs=(args.model,), force=args.force,
                        suffixes=_HTML_SUFFIXES, kind="report")
    model = load_model(args.model)
    if model.is_sparse:  # sparse solves only, no dense n x n arrays (issue 18)
        from plantcore.commands.sparse_models import report_sparse

        return report_sparse(args, model)
    from plantcore.commands.progress_option import progress_setting

    contents = write_html_report(model, args.output, tol=args.tol, order=args.order,
                                 max_error=args.max_error, source=args.model,
                                 progress=progress_setting(args), overwrite=args.force).contents
    red = contents.reduction
    reduced = f", reduced {red.order}" if red is not None else ""
    print(f"report written to {args.output} ({model.n} states, minimal "
          f"{contents.analysis.minimal_order}{reduced})")
    removed = contents.analysis.removed_unstable_modes
    if removed:
        from plantcore.reports.text import shown_removed_modes
        from plantcore.structure.removed_modes import hidden_mode_message

        shown = shown_removed_modes(removed, model)
        print("WARNING: " + _one_line(hidden_mode_message(shown, "the minimal realization")),
              file=sys.stderr)
    return EXIT_OK


# --- demo ---
def _cmd_demo(args) -> int:
    from plantcore.commands.progress_option import progress_setting
    from plantcore.demo import run_demo

    run_demo(args.output, example=args.example, progress=progress_setting(args),
             force=args.force)
    return EXIT_OK


# --- audit ---
def _cmd_audit(args) -> int:
    from plantcore.estimation import audit_from_file
    from plantcore.reports.audit import audit_html, audit_text

    if args.output:
        _check_output_first(args.output, inputs=(args.jacobians, args.expected),
                            force=args.force, suffixes=_HTML_SUFFIXES, kind="report")
    from plantcore.commands.progress_option import stages

    with stages("audit", args, 2 if args.output else 1) as bar:
        bar.step("observability matrix and rank decisions")
        audit = audit_from_file(args.jacobians, expected_unobservable=args.expected,
                                tol=args.tol)
        if args.output:  # written before anything is printed: a refused output prints one line
            from plantcore.files import atomic_write

            def render(f):  # rendered only once the path has passed atomic_write's checks
                bar.step("report plots")
                f.write(audit_html(audit, source=args.jacobians).encode("utf-8"))

            atomic_write(args.output, render, inputs=(args.jacobians, args.expected),
                         overwrite=args.force)
    verdict = EXIT_SPURIOUS if audit.spurious_dimension else EXIT_OK
    print(audit_text(audit, source=args.jacobians))
    if args.output:
        print(f"report written to {args.output}")
    return verdict


# --- sweep ---
def _cmd_sweep(args) -> int:
    from plantcore.reports.sweep_folder import check_output_folder, write_sweep_folder
    from plantcore.sweeps.spec import load_sweep_spec
    from plantcore.sweeps.sweep import sweep

    spec = load_sweep_spec(args.spec)
    check_output_folder(args.output, force=args.force, inputs=(args.spec,))
    executor = args.executor or ("dask" if args.scheduler else "local")
    if executor == "dask" and not args.scheduler:
        raise ValueError("--executor dask needs --scheduler ADDRESS (e.g. tcp://127.0.0.1:8786).")
    if args.scheduler and executor != "dask":
        raise ValueError(f"--scheduler is only used with --executor dask, not {executor}.")
    if executor == "dask":
        try:
            import distributed  # noqa: F401  (optional extra)
        except ImportError:
            raise ValueError("--executor dask needs dask.distributed; install it with "
                             "python -m pip install 'plantcore[cluster]'.") from None
    reduced_order = args.reduced_order if args.reduced_order is not None else spec.reduced_order
    tol = args.tol if args.tol is not None else spec.tolerance
    from plantcore.commands.progress_option import progress_setting

    result = sweep(spec.build, spec.points, executor=executor, scheduler=args.scheduler,
                   reduced_order=reduced_order, tol=tol, progress=progress_setting(args))
    files = write_sweep_folder(result, args.output, spec=spec, force=args.force)
    print(f"swept {len(result.rows)} points in {result.elapsed_seconds:.1f} s "
          f"({len(result.failed)} failed); wrote {len(files)} files to {args.output}")
    for row in result.failed[:3]:
        print(f"failed point: {row['error']}")
    return EXIT_OK



COMMANDS = {
    "inspect": _cmd_inspect,
    "reduce": _cmd_reduce,
    "sweep": _cmd_sweep,
    "compare": _cmd_compare,
    "report": _cmd_report,
    "demo": _cmd_demo,
    "audit": _cmd_audit,
}


def _build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="plantcore",
                     description="Controllability, observability, Kalman decomposition and "
                                 "certified reduction of linear state-space models.")
    from plantcore.core.version import __version__

    parser.add_argument("--version", action="version", version=f"plantcore {__version__}")
    from plantcore.commands.progress_option import add_progress_option

    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = sub.add_parser("inspect", help="part sizes, rank decisions and verdicts of a model",
                       epilog=_EXIT_CODES["inspect"])
    p.add_argument("model", help="model file (.toml, .json or .npz)")
    p.add_argument("--tol", type=float, default=None, help=_TOL_HELP)
    p.add_argument("--format", choices=("text", "markdown", "json"), default="text",
                   help="how to print the analysis (default text; json keeps every value "
                        "unrounded, text and markdown show values at rounding level as 0)")
    add_progress_option(p)

    p = sub.add_parser("reduce", help="write a minimal (or balanced-truncated) model",
                       description="Write a minimal (or balanced-truncated) model and print "
                                   "its equivalence certificate.",
                       epilog=_REDUCE_EXIT_CODES + " " + _OVERWRITE_POLICY)
    p.add_argument("model", help="model file (.toml, .json or .npz)")
    p.add_argument("-o", "--output", required=True, help="file for the reduced model (required; .toml, .json or .npz)")
    group = p.add_mutually_exclusive_group()
    group.add_argument("--order", type=int, default=None,
                       help="balanced truncation to this order after minimal realization "
                            "(default: the minimal realization, untruncated)")
    group.add_argument("--max-error", type=float, default=None, dest="max_error",
                       help="balanced truncation to the lowest order whose error bound is below "
                            "this (default: none)")
    p.add_argument("--tol", type=float, default=None, help=_TOL_HELP)
    p.add_argument(_ACKNOWLEDGE, action="store_true", dest="accept_hidden_unstable",
                   help="write the reduced model even when the minimal realization removes a "
                        "mode that is unstable or on the stability boundary (no controller "
                        "designed on the reduced model can stabilize the plant through it); "
                        "the WARNING is still printed and the exit code is 0")
    _add_force(p)
    add_progress_option(p)

    # --- compare ---
    p = sub.add_parser("compare", help="certify that two models have the same transfer matrix "
                                       "(exit 0 equivalent, 1 not, 2 bad input, 4 undecided)",
                       description="Certify that two models have the same transfer matrix, "
                                   "to the tolerance or to the attainable accuracy.",
                       epilog=_COMPARE_EXIT_CODES)
    p.add_argument("model_a", metavar="MODEL_A", help="reference model file (.toml, .json or .npz)")
    p.add_argument("model_b", metavar="MODEL_B", help="model file to check against it")
    p.add_argument("--tol", type=float, default=1e-9,
                   help="largest accepted peak error relative to the peak gain of MODEL_A "
                        "(default 1e-9)")
    p.add_argument("--exact", action="store_true",
                   help="also compare in exact rational arithmetic and let that decide "
                        "(small models; file numbers are taken at their exact binary value)")
    add_progress_option(p)
    # --- report ---
    p = sub.add_parser("report", help="write a self-contained HTML report with plots",
                       epilog=_EXIT_CODES["report"] + " " + _OVERWRITE_POLICY)
    p.add_argument("model", help="model file (.toml, .json or .npz)")
    p.add_argument("-o", "--output", required=True, help="HTML file to write (required)")
    p.add_argument("--tol", type=float, default=None, help=_TOL_HELP)
    group = p.add_mutually_exclusive_group()
    group.add_argument("--order", type=int, default=None,
                       help="order of the balanced truncation shown in the report (default: "
                            "chosen by --max-error)")
    group.add_argument("--max-error", type=float, default=None, dest="max_error",
                       help="truncate to the lowest order whose error bound is below this "
                            "(default: a tenth of the peak gain)")
    _add_force(p)
    add_progress_option(p)
    # --- demo ---
    p = sub.add_parser("demo", help="run inspect, reduce, compare and report on a packaged example",
                       epilog=_EXIT_CODES["demo"] + " " + _FOLDER_POLICY)
    p.add_argument("-o", "--output", default=None, metavar="FOLDER",
                   help="new (or empty) folder for the results, or with --force one holding "
                        "an earlier demo; default plantcore-demo-YYYYMMDD-HHMMSS in the "
                        "working directory")
    p.add_argument("--example", default="thermal_process",
                   help="packaged example to use (default thermal_process; also motion_axis)")
    _add_folder_force(p, "the demo")
    add_progress_option(p)
    # --- audit ---
    p = sub.add_parser("audit", help="observability audit of the Jacobians a linearized "
                                     "estimator used (exit 1 on spurious observability)",
                       epilog=_EXIT_CODES["audit"] + " " + _OVERWRITE_POLICY)
    p.add_argument("jacobians", metavar="JACOBIANS.npz",
                   help="archive with transition_jacobians (K, n, n), measurement_jacobians "
                        "(K, p, n) and optionally expected_unobservable (n, d), "
                        "measurement_noise, state_scale, state_names")
    p.add_argument("--expected", default=None, metavar="BASIS.npy",
                   help="expected unobservable basis (n, d); overrides the one in the archive "
                        "(default: the archive's expected_unobservable)")
    p.add_argument("-o", "--output", default=None, metavar="REPORT.html",
                   help="also write a self-contained HTML report with plots (default: none, "
                        "only the text summary is printed)")
    p.add_argument("--tol", type=float, default=None, help=_TOL_HELP)
    _add_force(p)
    add_progress_option(p)
    # --- sweep ---
    p = sub.add_parser("sweep", help="analyze a model family over a grid or random draws of "
                                     "its parameters",
                       epilog=_EXIT_CODES["sweep"] + " " + _FOLDER_POLICY)
    p.add_argument("spec", help="sweep specification (.toml) with expressions in parameters")
    p.add_argument("-o", "--output", required=True,
                   help="new (or empty) folder for the table, plots and summary, or with "
                        "--force one holding an earlier sweep (required)")
    p.add_argument("--executor", choices=("serial", "local", "dask"), default=None,
                   help="where the points run (default: local process pool, or dask with "
                        "--scheduler)")
    p.add_argument("--scheduler", default=None,
                   help="Dask scheduler address, e.g. tcp://127.0.0.1:8786 (default: none)")
    p.add_argument("--reduced-order", type=int, default=None, dest="reduced_order",
                   help="also measure the error of a balanced truncation to this order "
                        "(default: the spec's [analysis] reduced_order, else none)")
    p.add_argument("--tol", type=float, default=None, help=_TOL_HELP)
    _add_folder_force(p, "a sweep")
    add_progress_option(p)
    # --- commands in modules of their own (plantcore.commands) ---
    import importlib

    for module_name in COMMAND_MODULES:
        handler = importlib.import_module(f"plantcore.commands.{module_name}").register(sub)
        if handler is not None:
            COMMANDS[module_name] = handler
    return parser


def main(argv=None) -> int:
    """Entry point of the ``plantcore`` console script."""
    parser = _build_parser()
    try:
        args = parser.parse_args(argv)
    except _UsageError as exc:
        print(_one_line(exc), file=sys.stderr)
        return EXIT_BAD_INPUT
    if not args.command:
        parser.print_help(sys.stderr)
        return EXIT_BAD_INPUT
    from plantcore.files.safe_write import cleanup_on_terminate

    try:
        with cleanup_on_terminate():  # SIGTERM unwinds like Ctrl-C: temporaries are removed
            return COMMANDS[args.command](args)
    except SystemExit as exc:
        if exc.code == EXIT_TERMINATED:
            print("plantcore: terminated", file=sys.stderr)
        raise
    except BrokenPipeError:
        # The reader of our output went away (e.g. piped into `head`): not an error of ours.
        import os

        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return EXIT_OK
    except (ValueError, TypeError, OSError) as exc:
        print(f"plantcore {args.command}: error: {_one_line(exc)}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except NumericalBreakdown as exc:
        print(f"plantcore {args.command}: numerical breakdown: {_one_line(exc)}", file=sys.stderr)
        return EXIT_INTERNAL
    except KeyboardInterrupt:
        print("plantcore: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001  (a defect: still one line, a distinct code)
        print(f"plantcore {args.command}: internal error ({type(exc).__name__}): {_one_line(exc)}",
              file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
