from basinmark.cli import main

raise SystemExit(main())
