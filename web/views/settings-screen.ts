import type { MountScreen } from '../app-context';

// Placeholder until the settings screen lands (being built in this session).
export const mountSettingsScreen: MountScreen = (root) => {
  root.textContent = 'Settings';
};
