"""`python -m monitor` runs the same command line as `regime`."""

from monitor.cli import main

raise SystemExit(main())
