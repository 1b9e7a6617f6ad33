"""A stand-in for a program being tuned (fixture of tests/test_problems_command.py).

Options (anything else is only echoed):
  -a, -b, -c          switches adding 1, 2 and 4 to the score
  --level=N           adds 10 * N
  --fail=CODE         writes six numbered lines to standard error and exits with CODE
  --sleep=SECONDS     starts a helper process that writes its pid to sleeper.pid and sleeps, then
                      sleeps itself (the timeout test checks that both are stopped)
  --quiet             prints nothing
  --report=PATH       writes {"result": {"score": S}, "runs": [S]} to PATH
  --bytes=PATH        writes S bytes to PATH
Prints the lines "args=<JSON list of the arguments>", "cwd=<working folder>",
"setting=<value of TOY_SETTING>" and, last, "score=S".
"""

import json
import os
import subprocess
import sys
import time

score = 0
quiet = False
report = size_file = None
for argument in sys.argv[1:]:
    if argument in ("-a", "-b", "-c"):
        score += {"-a": 1, "-b": 2, "-c": 4}[argument]
    elif argument.startswith("--level="):
        score += 10 * int(argument.split("=", 1)[1])
    elif argument.startswith("--fail="):
        for line in range(1, 7):
            print(f"problem line {line}", file=sys.stderr)
        sys.exit(int(argument.split("=", 1)[1]))
    elif argument.startswith("--sleep="):
        seconds = float(argument.split("=", 1)[1])
        helper = subprocess.Popen([sys.executable, "-c", f"import time; time.sleep({seconds})"])
        with open("sleeper.pid", "w") as handle:
            handle.write(str(helper.pid))
        time.sleep(seconds)
    elif argument == "--quiet":
        quiet = True
    elif argument.startswith("--report="):
        report = argument.split("=", 1)[1]
    elif argument.startswith("--bytes="):
        size_file = argument.split("=", 1)[1]

if report is not None:
    with open(report, "w") as handle:
        json.dump({"result": {"score": score}, "runs": [score]}, handle)
if size_file is not None:
    with open(size_file, "wb") as handle:
        handle.write(b"x" * score)
if not quiet:
    print("args=" + json.dumps(sys.argv[1:]))
    print("cwd=" + os.getcwd())
    print("setting=" + os.environ.get("TOY_SETTING", ""))
    print(f"score={score}")
