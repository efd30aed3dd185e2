from explain.cli import main

main()
