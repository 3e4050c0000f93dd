// The page's only inline script (its hash is in the Content-Security-Policy). The page's
// program is shipped compressed in the data block `cw-main`, like the engine module and the
// worker (a third of its size); this inflates it and starts it from a blob: URL.
import { inflateBlock } from "./packed";

async function start(): Promise<void> {
  const program = await inflateBlock(document, "cw-main", "program");
  const url = URL.createObjectURL(new Blob([program], { type: "text/javascript" }));
  try {
    await import(url);
  } finally {
    URL.revokeObjectURL(url);
  }
}

start().catch((e: unknown) => {
  const fatal = document.getElementById("fatal");
  if (fatal) {
    fatal.textContent = `The page could not start: ${e instanceof Error ? e.message : String(e)}`;
    fatal.hidden = false;
  }
});
