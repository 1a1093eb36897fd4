/** Model bench: build a model from reference batches, inspect a version's evidence, evaluate, approve, deploy. */
import type { Me } from '../../api/session.ts';
import { href } from '../../router.ts';
import { Builder } from './builder.tsx';
import { ModelList } from './model-list.tsx';
import { VersionDetail } from './version.tsx';

export function ModelBench({ version, me }: { version: string | null; me: Me | null }) {
  return (
    <section class="view bench">
      <header class="view-head">
        <h1>Model bench</h1>
        <nav class="head-facts">
          <a href={href({ view: 'bench', version: null })}>new model</a>
        </nav>
      </header>
      <div class="bench-grid">
        <aside>
          <ModelList current={version} />
        </aside>
        <div>{version ? <VersionDetail key={version} version={version} me={me} /> : <Builder me={me} />}</div>
      </div>
    </section>
  );
}
