"""``confirm-service dossier CANDIDATE --out DIR`` and ``confirm-service dossier verify DIR``."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from confirm_service.cli import main
from confirm_service.cli.context import open_database, settings


@main.command("dossier")
@click.argument("what")
@click.argument("folder", required=False, type=click.Path(path_type=Path))
@click.option(
    "--out",
    "out",
    type=click.Path(path_type=Path),
    default=None,
    help="folder to write the dossier of CANDIDATE into",
)
@click.option(
    "--public-key",
    "public_key",
    type=click.Path(path_type=Path, exists=True),
    default=None,
    help="(verify) the log's public key, PEM, obtained independently",
)
def dossier(what: str, folder: Path | None, out: Path | None, public_key: Path | None) -> None:
    """Write the dossier of candidate WHAT into --out, or `dossier verify DIR` to check one.

    The dossier holds every scan, detection, prediction, check result, follow-up, sign-off and
    comment of the candidate, the protocol files, plots, and inclusion proofs of every audit
    entry against a signed checkpoint. A candidate is not a detection.
    """
    if what == "verify":
        if folder is None:
            raise click.UsageError("dossier verify needs the dossier folder")
        _verify(folder, public_key)
        return
    try:
        candidate_id = int(what)
    except ValueError:
        raise click.UsageError(f"{what!r} is neither a candidate id nor 'verify'") from None
    if out is None:
        raise click.UsageError("give --out DIR")
    _write(candidate_id, out)


def _write(candidate_id: int, folder: Path) -> None:
    from confirm_service.cli.progress import working

    with working("loading the physics and plotting libraries") as say:
        from confirm_service.dossier.build import build_dossier
        from confirm_service.dossier.render import write_dossier

        database = open_database()
        say(f"building the dossier of candidate {candidate_id} (predictions, proofs)")
        with database.write() as session:
            document = build_dossier(session, settings(), candidate_id)
        say(f"writing {folder}")
        paths = write_dossier(document, folder)
    for path in paths:
        click.echo(str(path))


def _verify(folder: Path, public_key: Path | None) -> None:
    from confirm_service.dossier.verify import verify_dossier

    if not folder.is_dir():
        raise click.UsageError(f"{folder} is not a folder")
    if public_key is None:
        public_key = folder / "public-key.pem"
        click.echo(
            "warning: using the key inside the dossier; pass --public-key with a key "
            "obtained independently for a meaningful check",
            err=True,
        )
    report = verify_dossier(folder, public_key.read_text(encoding="utf-8"))
    for line in report.checked:
        click.echo(f"checked: {line}")
    for problem in report.problems:
        click.echo(f"PROBLEM: {problem}", err=True)
    click.echo("dossier verified" if report.ok else "dossier NOT verified")
    sys.exit(0 if report.ok else 1)
