from condhint.cli import main

raise SystemExit(main())
