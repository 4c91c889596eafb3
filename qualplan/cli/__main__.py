from qualplan.cli import main

main()
