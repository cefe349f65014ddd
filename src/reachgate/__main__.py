from reachgate.cli import main

main()
