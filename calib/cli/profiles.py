"""``calib profiles``: list the shipped acceptance profiles, or print one to copy and edit."""

from __future__ import annotations

import argparse
import json
import sys
import textwrap

EXAMPLES = """\
examples:
  calib profiles                               the shipped profiles, one line each
  calib profiles --json                        the same as JSON
  calib profiles show bioanalytical > my-sop.toml   a copy to edit into your SOP
  calib profiles show my-sop.toml              check an edited profile and print it
  calib check run.xlsx --profile my-sop.toml   judge a run with it

The shipped profiles are examples based on published guidance; every limit names its
source. The laboratory must confirm each limit before relying on it.

exit codes: 0 done, 3 no such profile or the profile is malformed
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "profiles", help="list the shipped acceptance profiles, or print one",
        description="List the acceptance profiles shipped with calib, or print one ready to "
                    "copy and edit.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--json", action="store_true", help="list the profiles as JSON")
    parser.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    actions = parser.add_subparsers(dest="action", metavar="ACTION")
    show = actions.add_parser("show", help="print a profile's TOML text",
                              description="Print a shipped profile (or check and print a "
                                          "profile file) exactly as written, to copy and edit.")
    show.add_argument("name", metavar="NAME", help="shipped profile name or a TOML file")
    show.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from calib.checks.profile import load_profile, shipped_profiles

    if args.action == "show":
        profile = load_profile(args.name)  # a malformed profile stops here, naming the line
        sys.stdout.write(profile.text if profile.text.endswith("\n") else profile.text + "\n")
        return 0
    profiles = [load_profile(name) for name in shipped_profiles()]
    if args.json:
        json.dump([_entry(p) for p in profiles], sys.stdout, ensure_ascii=False, indent=2)
        sys.stdout.write("\n")
        return 0
    for p in profiles:
        print(f"{p.name} (version {p.version}, {len(p.rules)} rules)")
        print(textwrap.fill(p.description, width=100, initial_indent="    ",
                            subsequent_indent="    "))
    print("\nPrint one with: calib profiles show NAME. The shipped profiles are examples: "
          "confirm every limit\nagainst your method and SOP before relying on it.")
    return 0


def _entry(profile: object) -> dict[str, object]:
    from calib.checks.profile import Profile

    assert isinstance(profile, Profile)
    return {
        "name": profile.name,
        "version": profile.version,
        "description": profile.description,
        "sources": list(profile.sources),
        "sha256": profile.sha256,
        "defaults": {"model": profile.model.value, "weighting": profile.weighting.value,
                     "confidence": profile.confidence,
                     "zero_standards": profile.zero_standards,
                     "lod_method": profile.lod_method.value,
                     "fit_replicates": profile.fit_replicates},
        "proposes_narrowing": profile.narrowing.propose,
        "rules": [{"id": r.id, "severity": r.severity.value, "source": r.source}
                  for r in profile.rules],
    }
