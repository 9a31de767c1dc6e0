const PHRASES: Record<string, string> = {
	'person.invited': 'Invitation sent',
	'person.invitation-withdrawn': 'Invitation withdrawn',
	'person.joined': 'A new member joined',
	'person.roles-changed': 'Roles changed',
	'person.disabled': 'Account disabled',
	'person.enabled': 'Account enabled',
	'team.created': 'Team created',
	'team.updated': 'Team updated',
	'team.member-added': 'Team member added',
	'team.member-removed': 'Team member removed',
	'telescope.created': 'Telescope added',
	'telescope.updated': 'Telescope updated',
	'token.issued': 'API token issued',
	'token.revoked': 'API token revoked'
};

/** A short sentence for an event-log action, for the board's activity list. */
export function describeAction(action: string): string {
	return PHRASES[action] ?? action;
}
