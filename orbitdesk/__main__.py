from orbitdesk.cli import main

raise SystemExit(main())
