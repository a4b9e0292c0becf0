from readchan.cli import main

main()
