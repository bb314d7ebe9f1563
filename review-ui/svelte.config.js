// Svelte options shared by the Vite plugin and svelte-check: runes everywhere.
export default {
  compilerOptions: { runes: true },
};
