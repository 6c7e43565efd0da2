from robustff.cli import main

raise SystemExit(main())
