// The loading flag and the last problem of a store's reads, shared by every store: `track(fn)`
// clears the problem, sets `loading` while fn runs, and keeps a failure as problem details.
import { ref } from 'vue';
import { toProblem, type Problem } from '../api/problem';

export function useRequestState() {
  const loading = ref(false);
  const problem = ref<Problem | null>(null);
  async function track(fn: () => Promise<void>): Promise<void> {
    loading.value = true;
    problem.value = null;
    try {
      await fn();
    } catch (err) {
      problem.value = toProblem(err);
    } finally {
      loading.value = false;
    }
  }
  return { loading, problem, track };
}
