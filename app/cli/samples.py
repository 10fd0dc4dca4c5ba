"""`lowgmap samples`: list the bundled sample files, or copy them into a working folder."""
from __future__ import annotations

from lowgmap.app.cli.common import EXIT_OK, emit
from lowgmap.app.cli import common

__all__ = ["add_arguments", "run"]


def add_arguments(parser) -> None:
    parser.add_argument("names", nargs="*", metavar="NAME",
                        help="sample files to copy (a case name such as wedge_separator, or a file name); "
                             "default: all")
    parser.add_argument("--copy", metavar="FOLDER", help="copy the samples into FOLDER (created if missing)")
    parser.add_argument("--force", action="store_true", help="replace files that already exist in FOLDER")


def run(args) -> int:
    from lowgmap.app.files.samples import copy_samples, sample_cases, sample_dir, sample_files, sample_path

    if args.copy is None:
        if args.names:
            raise common.CliError("give --copy FOLDER to copy the named samples (without it the command lists them)")
        files = sample_files()
        data = {"folder": str(sample_dir()), "cases": sample_cases(), "files": files}
        lines = ["Bundled samples (invented scenarios, for demonstration):"]
        lines += [f"  {f}" for f in files]
        lines.append("Copy them with `lowgmap samples --copy FOLDER [NAME ...]`; a case runs as e.g. "
                     "`lowgmap margin FOLDER/condensate_line.toml`.")
        emit(args, data, "\n".join(lines))
        return EXIT_OK
    try:
        for name in args.names:
            sample_path(name)                       # an unknown name fails before anything is copied
        copied = copy_samples(args.copy, args.names or None, overwrite=args.force)
    except (FileExistsError, FileNotFoundError, NotADirectoryError) as exc:
        raise common.CliError(str(exc)) from None
    emit(args, {"copied": [str(p) for p in copied]},
         "\n".join([f"copied {len(copied)} file(s) into {args.copy}:"] + [f"  {p}" for p in copied]))
    return EXIT_OK
