"""``calib lab``: set up, once, the report template that carries the lab's letterhead."""

from __future__ import annotations

import argparse

from calib.cli.common import add_debug

EXAMPLES = """\
examples:
  calib lab init --template /srv/lab/our-lab.toml    once per user (or per installation)
  calib lab show                                     which template records are issued with
  CALIB_CONFIG=/srv/lab/calib.toml calib lab init --template our-lab.toml   a shared settings file

The settings file is $XDG_CONFIG_HOME/calib/config.toml (~/.config/calib/config.toml), or the
file named by CALIB_CONFIG.  It holds the template's path and the SHA-256 of its bytes: when
the template file is edited later, calib refuses it until `calib lab init` is run again, so a
change of letterhead is always a deliberate step.  --template on check, quantify, trend and
demo still chooses another template for one command.  Without any lab template, records say
"Laboratory not configured".
"""


def add_parser(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "lab", help="set up the lab's report template once (letterhead of every record)",
        description="Set up or show the lab's report template, used by every record "
                    "unless --template names another.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    actions = parser.add_subparsers(dest="action", metavar="ACTION")
    actions.required = True
    init = actions.add_parser("init", help="check a template and make it the lab's",
                              description="Check the template, then record its path and "
                                          "SHA-256 in the lab settings file.",
                              epilog=EXAMPLES,
                              formatter_class=argparse.RawDescriptionHelpFormatter)
    init.add_argument("--template", required=True, metavar="PATH",
                      help="the lab's report template (TOML; see report_templates/default.toml)")
    add_debug(init)
    init.set_defaults(handler=_run_init)
    show = actions.add_parser("show", help="show the lab's template and whether it is unchanged",
                              epilog=EXAMPLES,
                              formatter_class=argparse.RawDescriptionHelpFormatter)
    add_debug(show)
    show.set_defaults(handler=run_show)
    parser.set_defaults(debug=False)


def _run_init(args: argparse.Namespace) -> int:
    from calib.report.template import load_template, set_lab_template

    settings = set_lab_template(args.template)
    template = load_template(settings.template)
    print(f"Lab template set up: {settings.template}\n"
          f"  laboratory: {template.lab.name}\n"
          f"  SHA-256 {settings.template_sha256}\n"
          f"  settings written to {settings.source}\n"
          "Every record issued from now on names this template and its SHA-256.")
    return 0


def run_show(args: argparse.Namespace) -> int:
    from calib.labsettings import config_path, read_settings
    from calib.report.template import resolve_template

    settings = read_settings()
    if settings is None:
        print(f"No lab template is set up ({config_path()} does not exist): records say "
              "\"Laboratory not configured\".\nSet one up with: calib lab init --template FILE")
        return 0
    template = resolve_template()  # refuses a template edited since set-up (exit 3)
    print(f"Lab template: {settings.template}\n"
          f"  laboratory: {template.lab.name}\n"
          f"  SHA-256 {settings.template_sha256} (unchanged since set-up)\n"
          f"  settings file: {settings.source}")
    return 0
