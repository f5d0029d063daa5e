"""The polling workload of benches/simpy/polling.toml, written in SimPy as a
practitioner would write it by hand: a master process polls 16 slaves in
turn; each slave's messages arrive as a Poisson process into a queue.

A poll takes 64 µs, a turnaround 10 µs, a data reply 256 µs and an empty
reply 32 µs (1 Mbit/s). A slave takes what is queued when the poll has
ended, as halfwire's polling does.

Usage: model.py SECONDS RATE_PER_SLAVE SEED
Prints one JSON line: delivered messages, mean latency, polls.
"""

import collections
import json
import random
import sys

import simpy

SLAVES = 16
POLL = 64e-6
TURN = 10e-6
DATA = 256e-6
EMPTY = 32e-6


def source(env, queue, rate, rng):
    while True:
        yield env.timeout(rng.expovariate(rate))
        queue.append(env.now)


def master(env, queues, stats):
    while True:
        for q in queues:
            yield env.timeout(POLL)
            stats["polls"] += 1
            take = q.popleft() if q else None
            yield env.timeout(TURN)
            if take is None:
                yield env.timeout(EMPTY)
            else:
                yield env.timeout(DATA)
                stats["delivered"] += 1
                stats["latency_sum"] += env.now - take
            yield env.timeout(TURN)


def main():
    seconds, rate, seed = float(sys.argv[1]), float(sys.argv[2]), int(sys.argv[3])
    rng = random.Random(seed)
    env = simpy.Environment()
    queues = [collections.deque() for _ in range(SLAVES)]
    stats = {"polls": 0, "delivered": 0, "latency_sum": 0.0}
    for q in queues:
        env.process(source(env, q, rate, rng))
    env.process(master(env, queues, stats))
    env.run(until=seconds)
    mean = stats["latency_sum"] / stats["delivered"] if stats["delivered"] else 0.0
    print(json.dumps({"delivered": stats["delivered"], "mean_latency_s": mean, "polls": stats["polls"]}))


if __name__ == "__main__":
    main()
