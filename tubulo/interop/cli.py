"""`tubulo import fhir` and `tubulo export phenopacket` (registered by tubulo.cli).

Heavy packages (fhir.resources, pydantic, phenopackets, protobuf) are imported inside the handlers.
"""

from __future__ import annotations

import argparse
import sys
from datetime import date
from pathlib import Path

from ..errors import CaseError, Problem, TubuloError

__all__ = ["add_subparser", "write_atomic"]

EXIT_OK, EXIT_INVALID = 0, 2


def write_atomic(path: str | Path, text: str, force: bool = False) -> None:
    """Write text to path through a temporary file in the same folder and os.replace."""
    target = Path(path)
    if target.is_dir():
        raise TubuloError(f"{path}: is a folder; give a file name to write")
    if target.exists() and not force:
        raise TubuloError(f"{path}: already exists; choose another name or add --force to replace it")
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise TubuloError(f"{path}: the folder {folder} does not exist")
    from ..atomic import replace_file

    try:
        replace_file(target, text.encode("utf-8"))
    except OSError as exc:
        raise TubuloError(f"{path}: cannot write in {folder}: {exc.strerror or exc}") from None


def _date_arg(text: str) -> date:
    try:
        return date.fromisoformat(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a date (YYYY-MM-DD)") from None


def _top_arg(text: str) -> int:
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if n < 1:
        raise argparse.ArgumentTypeError(f"{text!r}: give at least 1")
    return n


def _cmd_import_fhir(args: argparse.Namespace) -> int:
    from .. import __version__
    from ..case import parse_case
    from .fhir import bundle_to_case, case_yaml, read_bundle, validate_bundle

    data = read_bundle(args.bundle)
    validate_bundle(data, args.bundle)
    imp = bundle_to_case(data, source=args.bundle, case_id=args.id, age_at=args.age_at)
    try:
        case = parse_case(imp.case, args.output)
    except CaseError as exc:
        problems = []
        for p in exc.problems:
            origin = imp.origin(p.path.split("[", 1)[0])
            problems.append(Problem(p.path, f"{p.message} (from {origin} in {args.bundle})" if origin else p.message))
        raise CaseError(problems, f"{args.bundle} -> {args.output}") from None
    write_atomic(args.output, case_yaml(imp, args.bundle, __version__), force=args.force)
    err = sys.stderr
    print(f"tubulo import fhir: {args.bundle} -> {args.output} (case {case.id})", file=err)
    for note in imp.notes:
        print(f"  note: {note}", file=err)
    print(f"  imported {len(imp.values)} value{'s' if len(imp.values) != 1 else ''}:", file=err)
    for v in imp.values:
        line = f"    {v.key:<34} {v.text:<16} {v.resource}, {v.effective or 'undated'}"
        print(line, file=err)
        if v.others:
            print(f"      newest of {len(v.others) + 1} values; not kept: " + "; ".join(v.others), file=err)
    if imp.medications:
        print(f"  medications: " + "; ".join(f"{m.name} ({m.resource}, {m.how})" for m in imp.medications), file=err)
    for n in case.notes:
        if n.level == "warning":
            print(f"  warning: {n}", file=err)
    print(f"  skipped {len(imp.skipped)}:", file=err)
    for s in imp.skipped:
        print(f"    {s.resource}: {s.reason}", file=err)
    return EXIT_OK


def _cmd_export_phenopacket(args: argparse.Namespace) -> int:
    from ..case import load_case
    from ..rank import rank_case
    from .phenopacket import check_phenopacket, phenopacket_document

    case = load_case(args.case)
    export = phenopacket_document(rank_case(case), top=args.top)
    try:
        text = check_phenopacket(export.document)
    except ValueError as exc:
        raise TubuloError(f"{args.case}: {exc}") from None
    write_atomic(args.output, text, force=args.force)
    err = sys.stderr
    if export.critical:
        print("!!! CRITICAL VALUES !!!", file=err)
        for c in export.critical:
            print(f"  !!! {c}", file=err)
    doc = export.document
    feats = doc.get("phenotypicFeatures") or []
    excluded = sum(1 for f in feats if f.get("excluded"))
    print(f"tubulo export phenopacket: {args.case} -> {args.output}: {len(feats)} phenotypic features "
          f"({excluded} excluded), {len(doc.get('measurements') or [])} measurements, "
          f"{len(doc.get('medicalActions') or [])} medical actions, "
          f"{len(doc.get('interpretations') or [])} interpretations", file=err)
    if export.left_out:
        print(f"  not carried by the document ({len(export.left_out)}):", file=err)
        for item in export.left_out:
            print(f"    {item}", file=err)
    print("  decision support, not a diagnosis: the interpretations are a ranked differential.", file=err)
    return EXIT_OK


def _needs_format(parser: argparse.ArgumentParser):
    def handler(args: argparse.Namespace) -> int:
        parser.print_help(sys.stderr)
        return EXIT_INVALID

    return handler


def add_subparser(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("import", help="turn a record from another system into a case file (fhir)")
    formats = p.add_subparsers(dest="import_format", metavar="FORMAT")
    f = formats.add_parser("fhir", help="an HL7 FHIR R4 JSON Bundle (Patient, Observation, MedicationStatement/"
                                        "MedicationRequest) -> a case file")
    f.add_argument("bundle", help="FHIR R4 Bundle, JSON")
    f.add_argument("-o", "--output", required=True, help="case file to write (.yaml)")
    f.add_argument("--id", help="case id (default: the Patient resource id)")
    f.add_argument("--age-at", type=_date_arg, metavar="YYYY-MM-DD",
                   help="compute the age at this date (default: the newest observation, else today)")
    f.add_argument("--force", action="store_true", help="replace the output file if it exists")
    f.set_defaults(handler=_cmd_import_fhir)
    p.set_defaults(handler=_needs_format(p))

    p = sub.add_parser("export", help="write a ranked case for another system (phenopacket)")
    formats = p.add_subparsers(dest="export_format", metavar="FORMAT")
    e = formats.add_parser("phenopacket", help="a GA4GH Phenopacket v2 JSON document of the case and its ranking")
    e.add_argument("case", help="case file (.yaml or .json)")
    e.add_argument("-o", "--output", required=True, help="phenopacket file to write (.json)")
    e.add_argument("--top", type=_top_arg, default=5, help="how many ranked candidates to write (default 5)")
    e.add_argument("--force", action="store_true", help="replace the output file if it exists")
    e.set_defaults(handler=_cmd_export_phenopacket)
    p.set_defaults(handler=_needs_format(p))
