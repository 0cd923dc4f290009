from leakbudget.cli import main

main()
