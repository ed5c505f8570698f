from chargeplan.cli import main

main()
