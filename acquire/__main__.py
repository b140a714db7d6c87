from acquire.cli import program

program()
