/** Where a project's global setup leaves the description of its store for the summary reporter. */
export function storeEnvKey(projectName: string): string {
  return `STORE_UNDER_TEST_${projectName.toUpperCase().replace(/[^A-Z0-9]/g, '_')}`;
}
