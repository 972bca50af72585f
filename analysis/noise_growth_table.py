"""The README's table of growth measurements from random loading: found / not found and the
accuracy of the headline (fastest) box mode against particles per cell, for the default deck and
the warm pair-beam deck, two seeds each. Usage: PYTHONPATH=. python analysis/noise_growth_table.py
"""
import streamsim
from streamsim.deck import load_deck

RANDOM = ['species.electrons.loading="random"', 'species.positrons.loading="random"']


def main():
    print("| deck | particles per cell | seed | fit | measured ± error | theory | "
          "measured/theory | within 2σ |")
    print("|---|---|---|---|---|---|---|---|")
    for path, label in ((None, "default (cold)"), ("runs/warm-pair-beams.toml", "warm")):
        for ppc in (16, 64, 256, 1024):
            for seed in (1, 2):
                deck = load_deck(path, RANDOM + [
                    f"species.electrons.particles_per_cell={ppc}",
                    f"species.positrons.particles_per_cell={ppc}", f"random_seed={seed}"])
                g = streamsim.run(deck, out=None, write=False, figures=False).summary["growth"]
                if g["measured"] is None:
                    print(f"| {label} | {ppc} | {seed} | not found: {g['reason']} "
                          f"(advice: {g['particles_per_cell_needed']} per cell) | | "
                          f"{g['theory']:.4f} | | |")
                    continue
                ok = abs(g["measured"] - g["theory"]) <= 2 * g["measured_err"]
                print(f"| {label} | {ppc} | {seed} | {g['fit']} | {g['measured']:.4f} ± "
                      f"{g['measured_err']:.4f} | {g['theory']:.4f} | {g['ratio']:.3f} | "
                      f"{'yes' if ok else 'no'} |", flush=True)


if __name__ == "__main__":
    main()
