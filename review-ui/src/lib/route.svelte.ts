/**
 * Hash routing for three screens: `#/` the queue, `#/item/<id>` one payment and `#/model` the model page. Hash routes keep the
 * worker's asset router out of the way and survive a reload.
 */
export type View = { name: "queue" } | { name: "item"; id: number } | { name: "model" };

function parse(hash: string): View {
  if (hash === "#/model") return { name: "model" };
  const match = /^#\/item\/(\d{1,15})$/.exec(hash);
  return match ? { name: "item", id: Number(match[1]) } : { name: "queue" };
}

export class Route {
  view = $state<View>(parse(window.location.hash));

  constructor() {
    window.addEventListener("hashchange", () => {
      this.view = parse(window.location.hash);
    });
  }

  openItem(id: number): void {
    window.location.hash = `#/item/${id}`;
  }

  openQueue(): void {
    window.location.hash = "#/";
  }
}

export const route = new Route();
