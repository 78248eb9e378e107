"""The ``plantcore realize`` command: a model file from impulse-response data.

``plantcore realize DATA -o OUT [--order K] [--sample-time T] [--noise-level S]
[--format text|json]`` reads the data (:mod:`plantcore.files.response_files`: an ``.npz``
with the array ``impulse_response`` of shape (samples, outputs, inputs), or a ``.csv`` with
``OUTPUT <- INPUT`` columns), builds a realization with
:func:`plantcore.reduction.impulse_realization.realize_impulse_response`, writes it as a
model file that :func:`plantcore.load_model` reads (``.toml``, ``.json`` or ``.npz`` by the
suffix of ``OUT``), and prints the evidence for the order.  The output is checked before
anything is read or computed (its suffix; an existing file is kept unless ``--force``),
written all at once, and never over the data file, even with ``--force``.  Exit codes: 0
written (a ``warning:`` line when the order is fragile), 2 bad input, 3 numerical breakdown.
"""

from __future__ import annotations

import json
import math

from plantcore.core.wording import SAFETY_CAUTION

_FORMATS = ("text", "json")


def register(subparsers):
    """Add the ``realize`` subparser; return its handler."""
    p = subparsers.add_parser(
        "realize", help="build a state-space model from impulse-response data, with the "
                        "evidence for its order",
        description="Build a state-space model from measured or simulated impulse-response "
                    "samples (Ho-Kalman / Kung realization from the singular value "
                    "decomposition of the block Hankel matrix) and write it as a model file.",
        epilog="DATA: an .npz archive with impulse_response (samples, outputs, inputs) and "
               "optionally sample_time, noise_level, inputs, outputs; or a .csv file whose "
               "header is 'sample' or 'time' followed by one 'OUTPUT <- INPUT' column per "
               "channel. Sample 0 holds D. An existing output file is kept unless --force is "
               "given; the data file is never overwritten. Exit codes: 0 the model was "
               "written; 2 bad input; 3 numerical breakdown.")
    p.add_argument("data", metavar="DATA", help="impulse-response data (.npz or .csv)")
    p.add_argument("-o", "--output", required=True, metavar="OUT",
                   help="model file to write (.toml, .json or .npz; required)")
    p.add_argument("--order", type=int, default=None,
                   help="order of the model (default: read from the Hankel singular values)")
    p.add_argument("--sample-time", type=float, default=None, dest="sample_time",
                   help="sample time of the data in seconds (default: the file's; without any, "
                        "the data are read as the expansion coefficients of a continuous-time "
                        "model)")
    p.add_argument("--noise-level", type=float, default=None, dest="noise_level",
                   help="standard deviation of the noise on each sample (0: exact data; "
                        "default: the file's, else estimated from the data)")
    p.add_argument("--format", choices=_FORMATS, default="text",
                   help="what to print: text (default) or json")
    from plantcore.cli import _add_force
    from plantcore.commands.progress_option import add_progress_option

    _add_force(p)
    add_progress_option(p)
    return _handler


def _resolve(given, stored, option: str, key: str, path: str):
    if given is not None and stored is not None and float(given) != float(stored):
        raise ValueError(f"{path}: {key}: the file gives {stored!r} but {option} gives {given!r}; "
                         "give one of them, or the same value.")
    return given if given is not None else stored


def _handler(args) -> int:
    from plantcore.cli import _check_output_first
    from plantcore.core.errors import ModelFileError
    from plantcore.files import save_model
    from plantcore.files.layout import MODEL_FILE_SUFFIXES
    from plantcore.files.response_files import load_impulse_response
    from plantcore.reduction.impulse_realization import realize_impulse_response

    _check_output_first(args.output, inputs=(args.data,), force=args.force,
                        suffixes=MODEL_FILE_SUFFIXES, kind="model file format",
                        suffix_selects_format=True)  # refuse before reading or computing
    data = load_impulse_response(args.data)
    sample_time = _resolve(args.sample_time, data.sample_time, "--sample-time", "sample_time",
                           args.data)
    noise_level = _resolve(args.noise_level, data.noise_level, "--noise-level", "noise_level",
                           args.data)
    from plantcore.commands.progress_option import stages

    try:
        with stages("realize", args, 1) as bar:
            bar.step("block Hankel matrix, its singular values and the order decision")
            fit = realize_impulse_response(data.values, sample_time=sample_time,
                                           order=args.order, noise_level=noise_level,
                                           inputs=data.inputs, outputs=data.outputs)
    except ValueError as exc:  # name the file and the field the problem belongs to
        field = "--order" if str(exc).startswith("order") else "impulse_response"
        raise ModelFileError(args.data, field, str(exc)) from None
    save_model(fit.model, args.output, inputs=(args.data,), overwrite=args.force)
    if args.format == "json":
        print(json.dumps(_as_dict(fit, args), indent=2, allow_nan=False))
    else:
        print(_as_text(fit, args), end="")
    return 0


def _number(x):
    return None if not math.isfinite(x) else float(x)


def _as_dict(fit, args) -> dict:
    return {
        "data": args.data,
        "output": args.output,
        "order": fit.order,
        "automatic_order": fit.automatic_order,
        "time_domain": "discrete" if fit.model.is_discrete else "continuous",
        "sample_time": fit.model.dt,
        "hankel_singular_values": [float(x) for x in fit.hankel_singular_values],
        "floor": float(fit.noise_floor),
        "noise_level": float(fit.noise_level),
        "noise_level_source": fit.noise_level_source,
        "gap": _number(fit.gap),
        "signal_margin": _number(fit.signal_margin),
        "decision": fit.decision.to_dict(),
        "fragile": fit.fragile,
        "saturated": fit.saturated,
        "block_rows": fit.block_rows,
        "block_columns": fit.block_columns,
        "window_samples": fit.window_samples,
        "window_orders": [list(pair) for pair in fit.window_orders],
        "plateau_ratio": _number(fit.plateau_ratio),
        "hankel_order": fit.hankel_order,
        "residual_search": [{"states": states, "statistic": float(statistic),
                             "threshold": float(threshold)}
                            for states, statistic, threshold in fit.residual_search],
        "time_scale": float(fit.time_scale),
        "reproduction_error": float(fit.reproduction_error),
        "reproduction_rms": float(fit.reproduction_rms),
        "notes": list(fit.notes),
        "caution": SAFETY_CAUTION,
    }


def _decision_line(d) -> str:
    """The decision's own line; against a noise floor, the noise test's verdict instead of
    the rounding window's wording."""
    if d.window_outcome is None:
        return d.describe()
    kept = "none" if not math.isfinite(d.smallest_kept) else f"{d.smallest_kept:.3g}"
    verdict = (f"FRAGILE ({d.window_outcome})" if d.window_outcome else
               "confident: the weakest kept value stands 100 x or more above the noise floor "
               "and the dropped values are the noise plateau")
    return (f"{d.label}: rank {d.rank} of {d.size}; smallest kept {kept}, largest dropped "
            f"{d.largest_dropped:.3g}, noise floor {d.tolerance:.3g} (relative to the largest); "
            f"{verdict}")


def _as_text(fit, args) -> str:
    model = fit.model
    samples = fit.window_orders[0][0] if fit.window_orders else fit.window_samples
    domain = (f"discrete time, sample time {model.dt:g} s" if model.is_discrete
              else "continuous time (data read as expansion coefficients)")
    shown = ", ".join(f"{x:.4g}" for x in fit.hankel_singular_values[:min(fit.order + 5, 40)])
    more = len(fit.hankel_singular_values) - min(fit.order + 5, 40)
    lines = [
        (f"impulse-response realization of {args.data}: {samples} samples, "
        f"{model.n_outputs} outputs x {model.n_inputs} inputs, {domain}"),
        (f"Hankel matrix: {fit.block_rows} x {fit.block_columns} blocks"
         + ("" if fit.window_samples == samples else f" (first {fit.window_samples} samples)")
         + f"; singular values: {shown}")
        + (f" (+{more} more)" if more > 0 else ""),
        (f"floor: {fit.noise_floor:.4g} (noise level {fit.noise_level:.4g}, "
        f"{fit.noise_level_source})"),
        f"order: {fit.order}" + ("" if fit.order == fit.automatic_order
                                 else f" (chosen; the data suggest {fit.automatic_order})"),
        (f"evidence: gap sigma_n / sigma_n+1 = {fit.gap:.4g}, "
        f"sigma_n / floor = {fit.signal_margin:.4g}"),
        f"decision: {_decision_line(fit.decision)}",
    ]
    if fit.residual_search:
        found = fit.automatic_order - fit.hankel_order
        searched = "; ".join(f"{states} states: {statistic:.3g} (threshold {threshold:.3g})"
                             for states, statistic, threshold in fit.residual_search)
        lines.append(f"residual search: {found} state(s) found below the Hankel floor "
                     f"({fit.hankel_order} above it); statistic per search: {searched}")
    lines += [
        (f"fit to the data: relative error {fit.reproduction_error:.3g}, "
        f"rms deviation {fit.reproduction_rms:.3g}"),
    ]
    lines += [f"note: {note}" for note in fit.notes]
    if fit.fragile:
        why = fit.decision.window_outcome or ("the data are too short to show the order"
                                             if fit.saturated else "a kept or dropped value lies "
                                             "within a factor 100 of the floor")
        lines.append(f"warning: the order depends on the floor ({why}); judge it by the gap "
                     "and the margin.")
    lines.append(f"model written to {args.output}")
    lines.append(SAFETY_CAUTION)
    return "\n".join(lines) + "\n"
