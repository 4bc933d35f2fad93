from .cli import run_main

if __name__ == "__main__":  # guarded: worker processes of a study import this module under another name
    run_main()
