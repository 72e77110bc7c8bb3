from planner_gui.cli import main

raise SystemExit(main())
