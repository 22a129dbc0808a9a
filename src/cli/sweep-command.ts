export async function sweepCommand(_argv: string[]): Promise<number> {
  return 2;
}
