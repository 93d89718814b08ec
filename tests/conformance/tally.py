"""The pass/fail tally the Python conformance checks share: one line per
message ("ok   NAME" or "FAIL NAME: why"), then "N passed, M failed", the
line tests/conformance/run.sh reads."""


class Tally:
    def __init__(self):
        self.passed = 0
        self.failed = 0

    def record(self, name, errors):
        if errors:
            self.failed += 1
            for e in errors:
                print(f"FAIL {name}: {e}")
        else:
            self.passed += 1
            print(f"ok   {name}")

    def finish(self, nothing_found=None):
        """Prints the totals; `nothing_found` (a message) counts as a failure
        when no message was checked at all. Returns the exit status."""
        if nothing_found and self.passed + self.failed == 0:
            print(nothing_found)
            self.failed += 1
        print(f"{self.passed} passed, {self.failed} failed")
        return 1 if self.failed else 0
