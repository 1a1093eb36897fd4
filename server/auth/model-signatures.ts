/**
 * Electronic signatures on a model version, for every view that shows the model
 * (ModelVersionSummary.signatures).
 */
import type { ModelSignature } from '../../core/api/rest.ts';
import type { SignatureRepository } from '../storage/repositories.ts';

export async function modelSignatures(signatures: SignatureRepository, versionId: string): Promise<ModelSignature[]> {
  return (await signatures.forObject('model', versionId)).map((s) => ({
    signer: s.userName,
    signerFullName: s.fullName,
    signerRole: s.role,
    meaning: s.meaning,
    modelSha256: s.objectHash,
    reason: s.reason,
    override: s.override,
    signedAt: Date.parse(s.signedAt),
    auditSeq: s.auditSeq,
  }));
}
