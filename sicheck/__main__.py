from sicheck.cli import main

main()
