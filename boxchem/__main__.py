"""``python -m boxchem``: the same as the ``boxchem`` command."""
import sys

try:
    from .cli import main
except KeyboardInterrupt:       # Ctrl-C while numpy & co. are still being imported
    print("boxchem: interrupted", file=sys.stderr)
    raise SystemExit(130) from None

raise SystemExit(main())
