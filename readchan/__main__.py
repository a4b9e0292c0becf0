from readchan.cli.main import main

main()
