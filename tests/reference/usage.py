"""The figures of panelready's `--timings` table against the kernel's own account of the run.

Usage:
  python usage.py WORKDIR PROGRAM ARG...
      Run PROGRAM ARG... in WORKDIR (its `--timings` table goes to stderr), wait for it with
      os.wait4, which returns the resource usage the kernel kept for the finished process
      (getrusage(2): ru_maxrss, its largest resident set in KiB on Linux; ru_utime and
      ru_stime, its processor time in user mode and in the kernel), and compare:
        - the table's last peak (whole MiB, rounded down) with ru_maxrss: no more than it plus
          1 MiB (the kernel keeps its count of resident pages per processor and reads it
          approximately, at different moments for the two figures: runs here printed 133–144
          MiB against a ru_maxrss 0.1–0.2 MiB lower, about one in three), and no less
          than it less 1.5 MiB and 0.5 % (what the run holds after its last stage);
        - the table's total user-mode and kernel seconds (processor minus kernel, and kernel)
          are no more than ru_utime and ru_stime plus a clock tick (the table leaves out the
          start and the exit), and no less than 80 % of them less 0.1 s;
        - each stage's kernel seconds are no more than its processor seconds, and the peaks
          never fall from one stage to the next;
        - the wall seconds of the stages add up to the total's (to the printed millisecond).
      Exits 1 on any mismatch.

Nothing here imports or calls panelready's code; it only runs the program.
"""

import os
import subprocess
import sys

TICK = 0.01  # /proc's clock tick (USER_HZ = 100 on Linux)


def main():
    workdir, program, args = sys.argv[1], sys.argv[2], sys.argv[3:]
    err_path = os.path.join(workdir, "usage.stderr")
    with open(err_path, "wb") as err:
        child = subprocess.Popen([program] + args, cwd=workdir, stdout=subprocess.DEVNULL, stderr=err)
        _, status, usage = os.wait4(child.pid, 0)
    text = open(err_path, encoding="utf-8").read()
    if os.waitstatus_to_exitcode(status) != 0:
        sys.exit(f"the run failed:\n{text}")
    lines = text.splitlines()
    try:
        head = next(i for i, l in enumerate(lines) if l.lstrip().startswith("wall s"))
    except StopIteration:
        sys.exit(f"no timings table on stderr:\n{text}")
    rows = []
    for line in lines[head + 1:]:
        parts = line.split(None, 4)
        if len(parts) < 5:
            break
        wall, cpu, kernel, peak, name = parts
        rows.append((float(wall), float(cpu), float(kernel), int(peak), name))
    if not rows or rows[-1][4] != "total":
        sys.exit(f"the table does not end with a total:\n{text}")
    stages, total = rows[:-1], rows[-1]
    bad = []
    maxrss_mib = usage.ru_maxrss / 1024
    if not maxrss_mib - 1.5 - 0.005 * maxrss_mib <= total[3] <= maxrss_mib + 1.0:
        bad.append(f"peak {total[3]} MiB, kernel's ru_maxrss {maxrss_mib:.3f} MiB")
    for label, ours, theirs in [
        ("user-mode", total[1] - total[2], usage.ru_utime),
        ("kernel", total[2], usage.ru_stime),
    ]:
        if not 0.8 * theirs - 0.1 <= ours <= theirs + TICK + 0.005:
            bad.append(f"{label} {ours:.2f} s against the kernel's {theirs:.3f} s")
    for wall, cpu, kernel, peak, name in stages:
        if kernel > cpu + 1e-9:
            bad.append(f"{name}: kernel {kernel} s > processor {cpu} s")
    peaks = [r[3] for r in stages]
    if peaks != sorted(peaks):
        bad.append(f"the peaks fall: {peaks}")
    if abs(sum(r[0] for r in stages) - total[0]) > 0.0005 * (len(stages) + 1):
        bad.append("the stages' wall seconds do not add up to the total's")
    if len(stages) < 3:
        bad.append(f"only {len(stages)} stages")
    if bad:
        sys.exit("mismatches:\n" + "\n".join(bad) + "\n" + text)
    print(f"{len(stages)} stages; peak {total[3]} MiB against ru_maxrss {maxrss_mib:.1f} MiB")


if __name__ == "__main__":
    main()
