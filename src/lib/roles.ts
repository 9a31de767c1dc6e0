/** Roles, their labels and what each is for; shared by server and pages. */
export const ROLES_LIST = ['admin', 'coordinator', 'duty', 'observer', 'spectroscopist', 'viewer'] as const;
export type RoleName = (typeof ROLES_LIST)[number];

export const ROLE_LABELS: Record<RoleName, string> = {
	admin: 'Administrator',
	coordinator: 'Coordinator',
	duty: 'Duty scientist',
	observer: 'Observer',
	spectroscopist: 'Spectroscopist',
	viewer: 'Viewer'
};

export const ROLE_PURPOSE: Record<RoleName, string> = {
	admin: 'People, teams, telescopes and tokens',
	coordinator: 'Runs the follow-up of an event and closes it',
	duty: 'Judges and acknowledges incoming alerts on shift',
	observer: 'Claims targets and reports observations for a telescope team',
	spectroscopist: 'Classifies transient candidates',
	viewer: 'Sees everything, changes nothing'
};

/**
 * How far a role reaches when handing roles to others: nobody grants a role ranked above their
 * own highest. Administrator alone is at the top; duty, observer and spectroscopist are peers.
 */
export const ROLE_RANK: Record<RoleName, number> = {
	admin: 3,
	coordinator: 2,
	duty: 1,
	observer: 1,
	spectroscopist: 1,
	viewer: 0
};
