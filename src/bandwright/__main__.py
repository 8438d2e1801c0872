from bandwright.cli import run

run()
