"""``tailstop extension build|install``: the LibreOffice Calc extension with every tailstop formula."""
from __future__ import annotations

import tempfile
from pathlib import Path

HELP = "Build or install tailstop.oxt, the LibreOffice Calc extension with every tailstop formula."


def add_arguments(parser):
    actions = parser.add_subparsers(dest="action", metavar="ACTION", required=True)
    build = actions.add_parser("build", help="write tailstop.oxt", description="Write tailstop.oxt into a folder.")
    build.add_argument("--out", metavar="DIR", type=Path, default=Path("."),
                       help="folder for tailstop.oxt (default: the current folder)")
    install = actions.add_parser(
        "install", help="install the extension for the current user",
        description="Install tailstop.oxt with LibreOffice's unopkg for the current user. Close LibreOffice first.")
    install.add_argument("--shared", action="store_true",
                         help="install for every user of this computer (needs administrator rights; as root "
                              "this is the only kind unopkg allows)")
    install.add_argument("--oxt", type=Path, help="install this tailstop.oxt instead of building one")
    return run


def run(args):
    from ..extension.build import build_extension
    from ..extension.libreoffice import user_install

    if args.action == "build":
        path = build_extension(args.out)
        print(f"wrote {path}")
        print("install it with `tailstop extension install`, or in LibreOffice: Tools > Extension Manager > Add")
        return 0
    with tempfile.TemporaryDirectory(prefix="tailstop-oxt-") as folder:
        oxt = args.oxt or build_extension(folder)
        output = user_install(oxt, shared=args.shared)
    if output:
        print(output)
    print(f"installed {Path(oxt).name} {'for every user' if args.shared else 'for this user'}; restart "
          "LibreOffice, then check with =TAIL_PROB(1500; 2; 600) in a cell (0.2873)")
    return 0
