"""The ``plantcore plate`` command: write the generated drying-table plate (a sparse model).

``plantcore plate -o plate.npz --size 100000`` builds
:func:`plantcore.examples.heated_plate.heated_plate` and writes it as a sparse ``.npz`` or a
``.toml`` manifest with Matrix Market files, ready for ``inspect``, ``reduce`` and ``report``.
"""

from __future__ import annotations

__all__ = ["register"]


def register(subparsers):
    """Add ``plate`` and return its handler."""
    from plantcore.examples.heated_plate import DEFAULT_PLATE_SIZE

    p = subparsers.add_parser(
        "plate", help="write the generated heated-plate example (a large sparse model)",
        description="Write the drying-table plate of our own scenario (3 heater strips, 4 "
                    "sensors, 5-point heat conduction) as a sparse model file.",
        epilog="An existing output file is kept unless --force is given. exit codes: 0 the "
               "model was written; 2 bad input or refused output; 3 numerical breakdown.")
    p.add_argument("-o", "--output", required=True,
                   help="model file to write (required): .npz (one sparse archive) or .toml "
                        "(a manifest with Matrix Market .mtx files beside it)")
    p.add_argument("--size", type=int, default=DEFAULT_PLATE_SIZE,
                   help=f"number of states, rounded to a square grid (default "
                        f"{DEFAULT_PLATE_SIZE:,}; 100000 and more work)")
    from plantcore.cli import _add_force

    _add_force(p)
    return _run


def _run(args) -> int:
    import os

    from plantcore.cli import _check_output_first
    from plantcore.examples.heated_plate import heated_plate
    from plantcore.files import save_model

    if os.path.splitext(args.output)[1].lower() not in (".npz", ".toml"):
        raise ValueError(f"{args.output}: file: a sparse model is written as .npz (one archive) "
                         "or .toml (a manifest with Matrix Market files).")
    _check_output_first(args.output, inputs=(), force=args.force, suffixes=(".npz", ".toml"),
                        kind="model file format", suffix_selects_format=True)  # before building
    model = heated_plate(args.size)
    save_model(model, args.output, overwrite=args.force)
    print(f"wrote {args.output}: {model.name}, {model.n:,} states, {model.A.nnz:,} nonzeros")
    return 0
