from rtanalyzer.cli.main import main

raise SystemExit(main())
