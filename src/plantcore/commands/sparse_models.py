"""The sparse branches of ``plantcore inspect``, ``reduce`` and ``report`` (issue 18).

:mod:`plantcore.cli` hands a model here when ``model.is_sparse``; these handlers call
:mod:`plantcore.large` and print or write what :mod:`plantcore.reports.sparse_report`
renders.  Progress goes to standard error by the convention of
:mod:`plantcore.commands.progress_option` (on a terminal, or with ``--progress``).  Not a
subcommand of its own: :func:`register` adds nothing.
"""

from __future__ import annotations

import json

from plantcore.commands.progress_option import stages

__all__ = ["inspect_sparse", "reduce_sparse", "register", "report_sparse"]


def register(subparsers) -> None:
    """Nothing to register: the handlers serve the existing commands."""


def _tolerance_note(args) -> None:
    if getattr(args, "tol", None) is not None:
        import sys

        print("note: --tol (the rank tolerance of the dense route) does not apply to a sparse "
              "model: its structural decisions are exact and the Gramians stop on their "
              "residual.", file=sys.stderr)


def inspect_sparse(args, model) -> int:
    _tolerance_note(args)
    from plantcore.large.summary import summarize_sparse
    from plantcore.reports.sparse_report import (
        sparse_summary_dict,
        sparse_summary_markdown,
        sparse_summary_text,
    )

    with stages("inspect", args) as bar:
        summary = summarize_sparse(model, progress=bar.step)
    if args.format == "json":
        print(json.dumps(sparse_summary_dict(summary), indent=2, allow_nan=False))
    elif args.format == "markdown":
        print(sparse_summary_markdown(summary, source=args.model), end="")
    else:
        print(sparse_summary_text(summary, source=args.model), end="")
    return 0


def reduce_sparse(args, model) -> int:
    _tolerance_note(args)
    import dataclasses

    from plantcore.files import save_model
    from plantcore.files.written_zeros import balanced_backward_error, clear_rounding_dust
    from plantcore.large.frequency import estimate_peak_error
    from plantcore.large.low_rank_balanced import low_rank_balanced_truncation
    from plantcore.reports.sparse_report import sparse_reduction_lines

    # the output was checked by the command before the model was read
    with stages("reduce", args) as bar:
        reduction = low_rank_balanced_truncation(model, order=args.order,
                                                 max_error=args.max_error, check_error=False,
                                                 progress=bar.step)
        # rounding dust within the computation's backward error is written as exact zeros
        # (the rule of the dense reduce), and the error is measured on what is written
        eta = balanced_backward_error(reduction.model,
                                      reduction.hankel_singular_values[:reduction.order],
                                      worked_order=reduction.structural.order)
        written = clear_rounding_dust(reduction.model, eta)
        bar.step("error check of the written model")
        peak = estimate_peak_error(model, written.model, progress=bar.step)
    reduction = dataclasses.replace(reduction, model=written.model, peak_error=peak)
    for line in sparse_reduction_lines(reduction):
        print(line)
    save_model(reduction.model, args.output, inputs=(args.model,), overwrite=args.force)
    print(f"reduced model written to {args.output} (dense, {reduction.order} states)")
    if written.cleared:
        print("  " + written.describe())
    return 0


def report_sparse(args, model) -> int:
    _tolerance_note(args)
    from plantcore.large.summary import sparse_report_contents
    from plantcore.reports.sparse_report import write_sparse_html_report

    with stages("report", args) as bar:
        contents = sparse_report_contents(model, order=args.order, max_error=args.max_error,
                                          progress=bar.step)
    write_sparse_html_report(contents, args.output, source=args.model, inputs=(args.model,),
                             overwrite=args.force)
    red = contents.reduction
    reduced = f", reduced {red.order}" if red is not None else ""
    print(f"report written to {args.output} ({model.n:,} states, sparse, structurally "
          f"{contents.summary.structural.order:,}{reduced})")
    if red is None:
        print(f"no reduction shown: {contents.reduction_problem}")
    return 0
