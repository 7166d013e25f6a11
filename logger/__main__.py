from logger.cli.main import main

main()
