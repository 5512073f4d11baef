from tracecheck.cli import main

raise SystemExit(main())
