"""``python -m boxchem``: the same as the ``boxchem`` command."""
from .cli import main

raise SystemExit(main())
