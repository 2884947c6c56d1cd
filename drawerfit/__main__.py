from drawerfit.cli import main

main()
