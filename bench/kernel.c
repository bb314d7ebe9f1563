/*
 * Reference for the scoring-kernel benchmark: the computation of shared-model's `mahalanobisSq`
 * (diff = x − μ, then the symmetric half of Λ) as the straightforward C loop, compiled with -O3
 * (without -ffast-math gcc keeps the sums scalar and in order). The TypeScript kernel computes the same sums on a layout prepared
 * once per model (shared-model/src/quadratic-form.ts), four rows at a time.
 * Usage: kernel <n> <seconds>. Prints one JSON object: {"n":…, "vectorsPerSecond":…, "checksum":…}.
 * Inputs come from the same xorshift generator as bench/kernel.ts, so both sides score equal data.
 */
#include <stdio.h>
#include <stdlib.h>
#include <stdint.h>
#include <time.h>

static uint32_t state = 2463534242u;
static double next_uniform(void) {
  state ^= state << 13; state ^= state >> 17; state ^= state << 5;
  return (double)state / 4294967296.0;
}

static double mahalanobis_sq(const double *precision, const double *mean, const double *x, int n, double *diff) {
  for (int i = 0; i < n; i++) diff[i] = x[i] - mean[i];
  double total = 0.0;
  for (int i = 0; i < n; i++) {
    const double *row = precision + (size_t)i * n;
    const double di = diff[i];
    double off = 0.0;
    for (int j = i + 1; j < n; j++) off += row[j] * diff[j];
    total += di * (row[i] * di + 2.0 * off);
  }
  return total;
}

static double now_seconds(void) {
  struct timespec t;
  clock_gettime(CLOCK_MONOTONIC, &t);
  return (double)t.tv_sec + (double)t.tv_nsec * 1e-9;
}

int main(int argc, char **argv) {
  int n = argc > 1 ? atoi(argv[1]) : 32;
  double seconds = argc > 2 ? atof(argv[2]) : 1.0;
  const int pool = 1024;
  double *precision = malloc(sizeof(double) * n * n);
  double *mean = malloc(sizeof(double) * n);
  double *xs = malloc(sizeof(double) * n * pool);
  double *diff = malloc(sizeof(double) * n);
  /* Λ = I + 0.01·(u_ij + u_ji): symmetric and diagonally dominant for the n used here. */
  for (int i = 0; i < n; i++)
    for (int j = 0; j <= i; j++) {
      double v = (i == j) ? 1.0 + next_uniform() : 0.01 * (next_uniform() - 0.5);
      precision[i * n + j] = v;
      precision[j * n + i] = v;
    }
  for (int i = 0; i < n; i++) mean[i] = next_uniform();
  for (int k = 0; k < n * pool; k++) xs[k] = next_uniform() * 2.0;

  double checksum = 0.0;
  long long vectors = 0;
  double start = now_seconds(), elapsed = 0.0;
  while (elapsed < seconds) {
    for (int k = 0; k < pool; k++) checksum += mahalanobis_sq(precision, mean, xs + (size_t)k * n, n, diff);
    vectors += pool;
    elapsed = now_seconds() - start;
  }
  printf("{\"n\":%d,\"vectorsPerSecond\":%.1f,\"checksum\":%.6e}\n", n, vectors / elapsed, checksum / vectors);
  free(precision); free(mean); free(xs); free(diff);
  return 0;
}
