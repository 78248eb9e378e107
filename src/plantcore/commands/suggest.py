"""The ``plantcore suggest`` command: where to add one more actuator or sensor.

``plantcore suggest MODEL [--candidates FILE] [--sensors] [--target-margin X]
[--goal G] [--max-count K] [--tol X] [--format text|markdown|json]`` ranks the candidates
(from the file's ``[[actuator]]`` or ``[[sensor]]`` tables, or one at each state) and prints
the recommended set (:func:`plantcore.suggest_actuators`, :func:`plantcore.suggest_sensors`).
Exit codes: 0 the recommended set reaches the goal (or nothing is needed); 1 the goal cannot
be reached with these candidates (or not within ``--max-count``); 2 bad input (one line naming
the file and the field, from :mod:`plantcore.cli`).  Nothing is written.
"""

from __future__ import annotations

EXIT_REACHED = 0
EXIT_NOT_REACHED = 1


def _handler(args) -> int:
    import json

    from plantcore.commands.progress_option import stages
    from plantcore.files import load_model
    from plantcore.structure.placement import suggest_actuators, suggest_sensors

    model = load_model(args.model)
    suggest = suggest_sensors if args.sensors else suggest_actuators
    with stages("suggest", args, 1) as bar:
        bar.step(f"mode table and greedy search over the candidate "
                 f"{'sensors' if args.sensors else 'actuators'}")
        suggestion = suggest(model, args.candidates, target_margin=args.target_margin,
                             max_count=args.max_count, goal=args.goal, tol=args.tol)
    if args.format == "json":
        print(json.dumps(suggestion.to_dict(), indent=2, allow_nan=False))
    elif args.format == "markdown":
        print(suggestion.to_markdown(), end="")
    else:
        print(suggestion.to_text(), end="")
    return EXIT_REACHED if suggestion.reaches_goal else EXIT_NOT_REACHED


def register(subparsers):
    """Add the ``suggest`` subparser and return its handler."""
    p = subparsers.add_parser(
        "suggest", help="rank candidate actuators (or sensors) by the PBH margin they add",
        description="Rank candidate actuators (or, with --sensors, sensors) by what they "
                    "restore and the PBH margin they reach, and recommend a smallest set that "
                    "makes the model controllable (observable).",
        epilog="exit codes: 0 the recommended set reaches the goal; 1 no set of the candidates "
               "reaches it (or not within --max-count); 2 bad input; 3 numerical breakdown.")
    p.add_argument("model", help="model file (.toml, .json or .npz)")
    p.add_argument("--candidates", default=None, metavar="FILE",
                   help="TOML file with [[actuator]] (or [[sensor]]) tables: name and column "
                        "(row) or entries; default: one unit input at (sensor of) each state")
    p.add_argument("--sensors", action="store_true",
                   help="suggest sensors (observability) instead of actuators")
    p.add_argument("--target-margin", type=float, default=None, dest="target_margin",
                   metavar="X", help="ask every goal mode for a PBH margin of at least X "
                                     "(relative to the model's scale, e.g. 1e-4; default: "
                                     "the structure alone)")
    p.add_argument("--goal", default=None,
                   choices=("controllable", "stabilizable", "observable", "detectable"),
                   help="default controllable (observable with --sensors); stabilizable "
                        "(detectable) asks only the modes that are not stable")
    p.add_argument("--max-count", type=int, default=None, dest="max_count", metavar="K",
                   help="recommend at most K candidates (default: as many as the goal needs)")
    p.add_argument("--tol", type=float, default=None,
                   help="relative rank tolerance (default 5e-11 of the model's scale, as for "
                        "inspect)")
    p.add_argument("--format", choices=("text", "markdown", "json"), default="text",
                   help="how to print the suggestion (default text; json keeps every value "
                        "unrounded, text and markdown show margins at rounding level as 0)")
    from plantcore.commands.progress_option import add_progress_option

    add_progress_option(p)
    return _handler
